package eiv

import (
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// Agreement is the Bland–Altman analysis of differences d = y − x
// (candidate minus comparative; Bland & Altman 1986, Lancet i:307; 1999,
// Stat. Methods Med. Res. 8:135).
type Agreement struct {
	N int
	// MeanDifference is d̄ with its t interval (n−1 df).
	MeanDifference Estimate
	// SDDifference is the SD of d (n−1 divisor).
	SDDifference float64
	// Multiplier is the z of the limits (1.96 for 95 % limits).
	Multiplier float64
	// Lower and Upper are the limits of agreement d̄ ∓ z·s, each with the
	// interval of Bland & Altman (1986): SE ≈ √(3s²/n), t on n−1 df.
	Lower, Upper Estimate
	// Proportional is the OLS regression of d on the mean (x+y)/2 (Bland
	// & Altman 1999, §3.2), without its jackknife: a slope different from
	// 0 shows a proportional bias.
	Proportional *Fit
	// ProportionalP is the two-sided p-value of that slope.
	ProportionalP float64
}

// BlandAltman computes the agreement of y with x. multiplier is the z of
// the limits; zero means 1.96. The differences in percent use
// AgreementPercent.
func BlandAltman(x, y []float64, multiplier float64, opt *Options) (*Agreement, error) {
	return blandAltman(x, y, multiplier, opt, false)
}

// BlandAltmanPercent is BlandAltman on the differences in percent of the
// mean level, 100·(y − x)/((x + y)/2): the scale on which a proportional
// error is constant. Every mean level must be positive.
func BlandAltmanPercent(x, y []float64, multiplier float64, opt *Options) (*Agreement, error) {
	return blandAltman(x, y, multiplier, opt, true)
}

func blandAltman(x, y []float64, multiplier float64, opt *Options, percent bool) (*Agreement, error) {
	conf, err := opt.confidence()
	if err != nil {
		return nil, err
	}
	if len(x) != len(y) {
		return nil, ErrLengthMismatch
	}
	d := make([]float64, len(x))
	m := make([]float64, len(x))
	for i := range x {
		m[i] = (x[i] + y[i]) / 2
		d[i] = y[i] - x[i]
		if percent {
			if !(m[i] > 0) {
				return nil, &PointError{Index: i, Field: "x", Err: ErrNonPositiveLevel}
			}
			d[i] = 100 * d[i] / m[i]
		}
	}
	return agreementOf(d, m, multiplier, conf)
}

// BlandAltmanLimits is BlandAltman without the regression of the
// differences on the means (Proportional nil): the bias and the limits of
// agreement, the differences y − x formed as they are read, with no copy
// of them or of the means (a difference plot of 10⁶ points draws only
// these). The numbers are BlandAltman's to the bit.
func BlandAltmanLimits(x, y []float64, multiplier float64, opt *Options) (*Agreement, error) {
	conf, err := opt.confidence()
	if err != nil {
		return nil, err
	}
	if len(x) != len(y) {
		return nil, ErrLengthMismatch
	}
	n := len(x)
	if n < 3 {
		return nil, ErrTooFewPoints
	}
	for i := range x {
		if !allFinite(y[i]-x[i], (x[i]+y[i])/2) {
			return nil, &PointError{Index: i, Field: "y", Err: ErrNonFinite}
		}
	}
	// centredMoments(d, d)'s mean and Sxx, d formed in each pass.
	fn := float64(n)
	var s float64
	for i := range x {
		s += y[i] - x[i]
	}
	mean := s / fn
	var c, ss float64
	for i := range x {
		dv := (y[i] - x[i]) - mean
		c += dv
		ss += dv * dv
	}
	mean, _ = twoSum(mean, c/fn)
	return limitsOf(n, mean, ss-c*c/fn, multiplier, conf), nil
}

func agreementOf(d, m []float64, multiplier, conf float64) (*Agreement, error) {
	n := len(d)
	if n < 3 {
		return nil, ErrTooFewPoints
	}
	for i := range d {
		if !allFinite(d[i], m[i]) {
			return nil, &PointError{Index: i, Field: "y", Err: ErrNonFinite}
		}
	}
	mm := centredMoments(d, d)
	a := limitsOf(n, mm.mx, mm.sxx, multiplier, conf)
	// The regression's own SEs give its p-value; its jackknife (three
	// arrays of n) is not reported.
	if f, err := ols(m, d, &Options{Confidence: conf}, false); err == nil {
		a.Proportional = f
		tt := 0.0
		if f.Slope.SE > 0 {
			tt = f.Slope.Value / f.Slope.SE
			a.ProportionalP = tTwoSided(tt, float64(n-2))
		} else {
			a.ProportionalP = 1
			if f.Slope.Value != 0 {
				a.ProportionalP = 0
			}
		}
	}
	return a, nil
}

// limitsOf is the bias and the limits of agreement of n differences with
// mean and centred sum of squares sxx.
func limitsOf(n int, mean, sxx, multiplier, conf float64) *Agreement {
	if multiplier == 0 {
		multiplier = 1.96
	}
	sd := math.Sqrt(sxx / float64(n-1))
	t := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(n - 1)}.Quantile(0.5 + conf/2)
	seMean := sd / math.Sqrt(float64(n))
	seLim := math.Sqrt(3 * sd * sd / float64(n))
	lo, hi := mean-multiplier*sd, mean+multiplier*sd
	return &Agreement{
		N:              n,
		MeanDifference: Estimate{Value: mean, SE: seMean, CI: symmetric(mean, t*seMean, conf, "t")},
		SDDifference:   sd,
		Multiplier:     multiplier,
		Lower:          Estimate{Value: lo, SE: seLim, CI: symmetric(lo, t*seLim, conf, "t, SE √(3s²/n)")},
		Upper:          Estimate{Value: hi, SE: seLim, CI: symmetric(hi, t*seLim, conf, "t, SE √(3s²/n)")},
	}
}

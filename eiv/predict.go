package eiv

import (
	"math"
	"strconv"
)

// Prediction is the fitted value and the bias against identity at one x.
type Prediction struct {
	X float64
	// Y is ŷ(x0) = a + b·x0, with its SE formed about the fit's centre X
	// (Centre):
	//	se² = SE_c² + 2·(x0 − X)·cov(ŷ(X), b) + (x0 − X)²·var(b)
	// (var(a) + x0²·var(b) + 2·x0·cov(a, b) when the fit states no centre)
	// and an interval with the fit's own critical value.
	Y Estimate
	// Bias is D(x0) = a + (b − 1)·x0 = ŷ(x0) − x0, the systematic
	// difference of y from x at x0 (method comparison); same SE as Y.
	Bias Estimate
}

// At returns the prediction and bias at x0 from the fit's analytic
// covariance (the jackknife's for weighted_deming), in the centred form
// that keeps its digits far from the origin.
func (f *Fit) At(x0 float64) Prediction {
	b, vb := f.Slope.Value, f.Slope.SE*f.Slope.SE
	c := f.Centre
	if c == nil {
		c = &Centre{Y: f.Intercept.Value, SE: f.Intercept.SE, Cov: f.CovSlopeIntercept}
	}
	h := x0 - c.X
	v := c.SE*c.SE + h*(2*c.Cov+h*vb)
	se := math.Sqrt(math.Max(v, 0))
	crit := 0.0
	if f.Slope.SE > 0 {
		crit = (f.Slope.CI.Upper - f.Slope.CI.Lower) / (2 * f.Slope.SE)
	}
	y := c.Y + b*h
	return Prediction{X: x0,
		Y:    Estimate{Value: y, SE: se, CI: symmetric(y, crit*se, f.Confidence, f.Slope.CI.Method)},
		Bias: Estimate{Value: y - x0, SE: se, CI: symmetric(y-x0, crit*se, f.Confidence, f.Slope.CI.Method)},
	}
}

// Band returns the lower and upper confidence limits of the fitted line at
// each x (the pointwise confidence band).
func (f *Fit) Band(xs []float64) (lower, upper []float64) {
	lower, upper = make([]float64, len(xs)), make([]float64, len(xs))
	for i, x := range xs {
		p := f.At(x)
		lower[i], upper[i] = p.Y.CI.Lower, p.Y.CI.Upper
	}
	return
}

// OLSComparison shows how far ordinary least squares is from an
// errors-in-variables fit of the same data.
type OLSComparison struct {
	Method Method // the errors-in-variables method compared with
	// SlopeDiff and InterceptDiff are OLS minus EIV; SlopeRelative is
	// 100·(b_OLS/b_EIV − 1) percent. Their intervals are paired bootstrap
	// percentile intervals when a bootstrap ran, else paired jackknife t
	// intervals; Interval.Method says which, and it is empty when neither
	// could be had.
	SlopeDiff, InterceptDiff, SlopeRelative Estimate
	// Reliability is κ = 1 − mean(σx²)/var(x_obs) when σx is stated
	// (HasReliability), and PredictedOLSSlope = κ·b_EIV is the attenuated
	// slope that classical measurement error predicts OLS to find.
	HasReliability    bool
	Reliability       float64
	PredictedOLSSlope float64
	// At holds the bias against identity under each fit at the x values asked for.
	At []BiasShift
	// Summary is one plain sentence.
	Summary string
}

// BiasShift is the bias at one x under OLS and under the EIV fit.
type BiasShift struct {
	X, OLS, EIV, Difference float64
}

// CompareOLS compares ols with eiv. sx may be nil. boot, when not nil,
// must hold the lines of (eiv, ols) as its estimators 0 and 1, fitted on the
// same resamples; jack, when not nil, the leave-one-out lines in the same
// order (from JackknifeLines), used from four points up.
func CompareOLS(ols, eiv *Fit, x, sx []float64, at []float64, boot *BootstrapResult, jack [][]Line) *OLSComparison {
	c := &OLSComparison{Method: eiv.Method}
	slopeDiff := func(l []Line) float64 { return l[1].Slope - l[0].Slope }
	intDiff := func(l []Line) float64 { return l[1].Intercept - l[0].Intercept }
	rel := func(l []Line) float64 { return 100 * (l[1].Slope/l[0].Slope - 1) }
	full := []Line{{eiv.Intercept.Value, eiv.Slope.Value}, {ols.Intercept.Value, ols.Slope.Value}}
	est := func(stat Statistic) Estimate {
		e := Estimate{Value: stat(full)}
		if boot != nil {
			if s, err := boot.Summarize(stat); err == nil && s.Percentile != nil {
				e.SE, e.CI = s.SE, *s.Percentile
				e.CI.Method = "paired bootstrap percentile"
				return e
			}
		}
		// Leave-one-out samples of two points fit every line through both
		// points: the paired differences all vanish, an SE of 0 that says
		// nothing. Below four points there is no jackknife interval.
		if len(jack) >= 4 {
			se := jackSE(jack, stat)
			t := tQuantile(eiv.Confidence, eiv.N-2)
			e.SE = se
			e.CI = symmetric(e.Value, t*se, eiv.Confidence, "paired jackknife-t")
		}
		return e
	}
	c.SlopeDiff, c.InterceptDiff, c.SlopeRelative = est(slopeDiff), est(intDiff), est(rel)
	if sx != nil {
		var vx float64
		for _, s := range sx {
			vx += s * s
		}
		vx /= float64(len(sx))
		m := centredMoments(x, x)
		if varX := m.sxx / (m.n - 1); varX > 0 {
			c.HasReliability = true
			c.Reliability = 1 - vx/varX
			c.PredictedOLSSlope = c.Reliability * eiv.Slope.Value
		}
	}
	for _, x0 := range at {
		do := ols.Intercept.Value + (ols.Slope.Value-1)*x0
		de := eiv.Intercept.Value + (eiv.Slope.Value-1)*x0
		c.At = append(c.At, BiasShift{X: x0, OLS: do, EIV: de, Difference: do - de})
	}
	c.Summary = c.sentence(eiv.Confidence)
	return c
}

// sentence says how far OLS is from the fit. It says that OLS would
// understate (or overstate) the slope only when the interval of the
// relative difference excludes zero; otherwise, or without an interval, it
// says by how much the two differ and that no difference is excluded.
func (c *OLSComparison) sentence(conf float64) string {
	// Written with strconv rather than fmt (a small fit spent 4 % of its
	// server CPU in these Sprintf calls); appendG formats as fmt's %g does,
	// which TestSentenceMatchesFmt checks on every branch.
	r := c.SlopeRelative
	s := make([]byte, 0, 256)
	switch {
	case r.CI.Method != "" && (r.CI.Lower > 0 || r.CI.Upper < 0):
		verb, mag, lo, hi := "overstate", r.Value, r.CI.Lower, r.CI.Upper
		if r.Value < 0 {
			verb, mag, lo, hi = "understate", -r.Value, -r.CI.Upper, -r.CI.Lower
		}
		// "Compared with %s, OLS would %s the slope by %.3g %% (%g %% CI %.3g to %.3g %%)"
		s = append(append(append(append(s, "Compared with "...), c.Method...), ", OLS would "...), verb...)
		s = appendG(append(s, " the slope by "...), mag, 3, false)
		s = appendCI(append(s, " % ("...), conf, lo, hi)
		s = append(s, " %)"...)
	case r.CI.Method != "":
		// "OLS and %s differ in slope by %+.3g %% (%g %% CI %.3g to %.3g %%: the interval includes no difference)"
		s = appendG(append(append(append(s, "OLS and "...), c.Method...), " differ in slope by "...), r.Value, 3, true)
		s = appendCI(append(s, " % ("...), conf, r.CI.Lower, r.CI.Upper)
		s = append(s, " %: the interval includes no difference)"...)
	default:
		// "OLS and %s differ in slope by %+.3g %% (no interval: the difference is not shown to be real)"
		s = appendG(append(append(append(s, "OLS and "...), c.Method...), " differ in slope by "...), r.Value, 3, true)
		s = append(s, " % (no interval: the difference is not shown to be real)"...)
	}
	if len(c.At) > 0 {
		// The difference of the fitted lines at x0, which is also the
		// difference of their biases y − x when x and y are one quantity.
		// "; at x = %g the OLS line differs from it by %+.3g"
		s = appendG(append(s, "; at x = "...), c.At[0].X, -1, false)
		s = appendG(append(s, " the OLS line differs from it by "...), c.At[0].Difference, 3, true)
	}
	if c.HasReliability {
		// "; the reliability ratio κ = %.4g predicts an OLS slope of %.4g"
		s = appendG(append(s, "; the reliability ratio κ = "...), c.Reliability, 4, false)
		s = appendG(append(s, " predicts an OLS slope of "...), c.PredictedOLSSlope, 4, false)
	}
	return string(append(s, '.'))
}

// appendCI appends "%g %% CI %.3g to %.3g" of (100·conf, lo, hi).
func appendCI(s []byte, conf, lo, hi float64) []byte {
	s = appendG(s, 100*conf, -1, false)
	s = appendG(append(s, " % CI "...), lo, 3, false)
	return appendG(append(s, " to "...), hi, 3, false)
}

// appendG appends v as fmt's %g (prec −1), %.<prec>g or, with plus,
// %+.<prec>g write it: strconv's digits, with a sign for plus, "+Inf"
// and "-Inf" always signed, NaN signed only with plus (fmt.fmtFloat).
func appendG(dst []byte, v float64, prec int, plus bool) []byte {
	var buf [32]byte
	num := strconv.AppendFloat(buf[:1], v, 'g', prec, 64)
	if num[1] == '-' || num[1] == '+' {
		num = num[1:]
	} else {
		num[0] = '+'
	}
	if num[1] == 'N' && !plus {
		num = num[1:]
	} else if num[1] != 'I' && !plus && num[0] == '+' {
		num = num[1:]
	}
	return append(dst, num...)
}

func jackSE(jack [][]Line, stat Statistic) float64 {
	n := float64(len(jack))
	var small [64]float64 // a small sample's statistics stay on the stack
	th := small[:0]
	if len(jack) > len(small) {
		th = make([]float64, 0, len(jack))
	}
	th = th[:len(jack)]
	var m float64
	for i, l := range jack {
		th[i] = stat(l)
		m += th[i]
	}
	m /= n
	var ss float64
	for _, t := range th {
		ss += (t - m) * (t - m)
	}
	return math.Sqrt((n - 1) / n * ss)
}

// JackknifeLines fits every estimator to each leave-one-out sample of s;
// element i holds the lines without point i, in the order of ests.
func JackknifeLines(s Sample, ests []Estimator) ([][]Line, error) {
	n := s.Len()
	if n < 4 {
		return nil, ErrTooFewPoints
	}
	res := &BootstrapResult{k: len(ests)}
	if err := res.jackknife(contextBackground, s, ests); err != nil {
		return nil, err
	}
	if res.loo == nil {
		return nil, ErrDegenerate
	}
	out := make([][]Line, n)
	for i := range n {
		out[i] = res.loo[i*len(ests) : (i+1)*len(ests)]
	}
	return out, nil
}

// JackknifeAt is the jackknife estimate of uncertainty of ŷ(x0) and of the
// bias D(x0) = ŷ(x0) − x0 from leave-one-out lines (loo[i] the line without
// point i), with a t interval on n−2 df around the full-sample line.
func JackknifeAt(full Line, loo []Line, x0, conf float64) Prediction {
	v := make([]float64, len(loo))
	for i, l := range loo {
		v[i] = l.Intercept + l.Slope*x0
	}
	se := jackSE1(v)
	t := tQuantile(conf, len(loo)-2)
	y := full.Intercept + full.Slope*x0
	return Prediction{X: x0,
		Y:    Estimate{Value: y, SE: se, CI: symmetric(y, t*se, conf, "jackknife-t")},
		Bias: Estimate{Value: y - x0, SE: se, CI: symmetric(y-x0, t*se, conf, "jackknife-t")},
	}
}

func jackSE1(v []float64) float64 {
	n := float64(len(v))
	var m float64
	for _, x := range v {
		m += x
	}
	m /= n
	var ss float64
	for _, x := range v {
		ss += (x - m) * (x - m)
	}
	return math.Sqrt((n - 1) / n * ss)
}

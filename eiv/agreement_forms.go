package eiv

import (
	"fmt"
	"math"
)

// RegressionLimits are Bland & Altman's (1999, Stat. Methods Med. Res.
// 8:135, §3.2) limits of agreement for differences whose mean and spread
// change with the level: with D = y − x and A = (x + y)/2,
//
//	D = b0 + b1·A                 (OLS; the bias at level A)
//	|R| = c0 + c1·A               (OLS of the absolute residuals of that fit)
//	limits  b0 + b1·A ∓ z·√(π/2)·(c0 + c1·A)
//
// since E|R| = σ·√(2/π) for normal residuals (z·√(π/2) = 2.46 for z = 1.96).
// The paper gives no interval for these limits and none is given here.
type RegressionLimits struct {
	N int
	// Bias is the fit of D on A (b0 = Intercept, b1 = Slope) and BiasSlopeP
	// the two-sided p-value of b1 = 0.
	Bias       *Fit
	BiasSlopeP float64
	// Spread is the fit of |R| on A (c0, c1) and SpreadSlopeP the p-value
	// of c1 = 0.
	Spread       *Fit
	SpreadSlopeP float64
	// Multiplier is z·√(π/2).
	Multiplier float64
	// MinLevel and MaxLevel bound the observed A: the limits describe that range.
	MinLevel, MaxLevel float64
	// Warnings are non-fatal diagnostics, each a *Warning
	// (WarnNegativeSpread when c0 + c1·A < 0 somewhere in the range).
	Warnings []error
}

// At returns the lower limit, the bias and the upper limit at level a.
func (r *RegressionLimits) At(a float64) (lower, bias, upper float64) {
	bias = r.Bias.Intercept.Value + r.Bias.Slope.Value*a
	h := r.Multiplier * (r.Spread.Intercept.Value + r.Spread.Slope.Value*a)
	return bias - h, bias, bias + h
}

// RegressionBasedLimits computes the regression-based limits of agreement
// of y with x. opt's Confidence sets the level of the coefficients'
// intervals.
func RegressionBasedLimits(x, y []float64, opt *AgreementOptions) (*RegressionLimits, error) {
	conf, z, err := opt.resolve()
	if err != nil {
		return nil, err
	}
	if err := checkXY(x, y); err != nil {
		return nil, err
	}
	n := len(x)
	d, a := make([]float64, n), make([]float64, n)
	for i := range x {
		d[i], a[i] = y[i]-x[i], (x[i]+y[i])/2
	}
	o := &Options{Confidence: conf}
	bias, err := OLS(a, d, o)
	if err != nil {
		return nil, fmt.Errorf("eiv: regression of the differences on the mean: %w", err)
	}
	r := make([]float64, n)
	for i := range d {
		r[i] = math.Abs(d[i] - bias.Intercept.Value - bias.Slope.Value*a[i])
	}
	spread, err := OLS(a, r, o)
	if err != nil {
		return nil, fmt.Errorf("eiv: regression of the absolute residuals on the mean: %w", err)
	}
	res := &RegressionLimits{N: n, Bias: bias, BiasSlopeP: slopeP(bias), Spread: spread, SpreadSlopeP: slopeP(spread),
		Multiplier: z * math.Sqrt(math.Pi/2), MinLevel: a[0], MaxLevel: a[0]}
	for _, v := range a {
		res.MinLevel, res.MaxLevel = math.Min(res.MinLevel, v), math.Max(res.MaxLevel, v)
	}
	for _, v := range []float64{res.MinLevel, res.MaxLevel} {
		if spread.Intercept.Value+spread.Slope.Value*v < 0 {
			res.Warnings = append(res.Warnings, &Warning{Code: WarnNegativeSpread, Message: fmt.Sprintf(
				"the fitted spread of the differences is negative at level %.4g: the regression-based limits cross there", v)})
			break
		}
	}
	return res, nil
}

// slopeP is the two-sided t p-value of an OLS slope (n−2 df).
func slopeP(f *Fit) float64 {
	if f.Slope.SE > 0 {
		return tTwoSided(f.Slope.Value/f.Slope.SE, float64(f.N-2))
	}
	if f.Slope.Value != 0 {
		return 0
	}
	return 1
}

// RatioLimits are limits of agreement on the log scale back-transformed to
// ratios y/x (Bland & Altman 1986, §"Relation between difference and
// mean"; 1999, §3.1): a proportional difference is constant as a ratio.
type RatioLimits struct {
	// Log is the analysis of ln y − ln x against (ln x + ln y)/2.
	Log *Agreement
	// Ratio is the geometric mean ratio exp(mean log difference); Lower
	// and Upper the ratio limits exp(mean ∓ z·SD). Each interval is the
	// log-scale interval back-transformed (so not symmetric); SE is the
	// log-scale SE times the ratio (delta method, for tables).
	Ratio, Lower, Upper Estimate
}

// RatioBasedLimits computes ratio limits of agreement of y with x. Every
// x and y must be positive.
func RatioBasedLimits(x, y []float64, opt *AgreementOptions) (*RatioLimits, error) {
	conf, z, err := opt.resolve()
	if err != nil {
		return nil, err
	}
	if err := checkXY(x, y); err != nil {
		return nil, err
	}
	n := len(x)
	d, m := make([]float64, n), make([]float64, n)
	for i := range x {
		if !(x[i] > 0) {
			return nil, &PointError{Index: i, Field: "x", Err: ErrNonPositiveLevel}
		}
		if !(y[i] > 0) {
			return nil, &PointError{Index: i, Field: "y", Err: ErrNonPositiveLevel}
		}
		lx, ly := math.Log(x[i]), math.Log(y[i])
		d[i], m[i] = ly-lx, (lx+ly)/2
	}
	ag, err := agreementOf(d, m, z, conf)
	if err != nil {
		return nil, err
	}
	exp := func(e Estimate) Estimate {
		v := math.Exp(e.Value)
		return Estimate{Value: v, SE: v * e.SE, CI: Interval{Lower: math.Exp(e.CI.Lower), Upper: math.Exp(e.CI.Upper),
			Level: e.CI.Level, Method: e.CI.Method + ", back-transformed from the log scale"}}
	}
	return &RatioLimits{Log: ag, Ratio: exp(ag.MeanDifference), Lower: exp(ag.Lower), Upper: exp(ag.Upper)}, nil
}

// LimitsForm names the form of limits of agreement the data call for.
type LimitsForm string

const (
	FormConstant   LimitsForm = "constant"   // bias ∓ z·SD
	FormRegression LimitsForm = "regression" // RegressionBasedLimits
	FormRatio      LimitsForm = "ratio"      // RatioBasedLimits
)

// LimitsChoice says which form of limits the data call for, and why.
type LimitsChoice struct {
	Form LimitsForm
	// ProportionalP and SpreadP are the p-values of the slopes of D on A
	// (a bias that changes with the level) and of |R| on A (a spread that
	// changes with the level), on the original scale.
	ProportionalP, SpreadP float64
	// LogChecked says whether the log scale was examined (every value
	// positive); LogProportionalP and LogSpreadP are the same checks on
	// ln y − ln x.
	LogChecked                   bool
	LogProportionalP, LogSpreadP float64
	// Alpha is the level of the checks.
	Alpha float64
	// Reason is a sentence for people.
	Reason string
}

// ChooseLimits decides between constant, ratio and regression-based limits
// (Bland & Altman 1999, §3) from two checks at level 0.05: a slope of the
// differences on the mean (proportional bias) and a slope of their absolute
// residuals on the mean (heteroscedasticity). Neither on the original scale:
// constant limits. Otherwise, when every value is positive and neither check
// fires on the log scale: ratio limits. Otherwise: regression-based limits.
func ChooseLimits(x, y []float64) (*LimitsChoice, error) {
	const alpha = 0.05
	rl, err := RegressionBasedLimits(x, y, nil)
	if err != nil {
		return nil, err
	}
	c := &LimitsChoice{ProportionalP: rl.BiasSlopeP, SpreadP: rl.SpreadSlopeP, Alpha: alpha}
	if c.ProportionalP >= alpha && c.SpreadP >= alpha {
		c.Form = FormConstant
		c.Reason = fmt.Sprintf("neither the bias (p = %.2g) nor the spread (p = %.2g) of the differences changes with the level: constant limits", c.ProportionalP, c.SpreadP)
		return c, nil
	}
	what := "the bias"
	switch {
	case c.ProportionalP < alpha && c.SpreadP < alpha:
		what = "the bias and the spread"
	case c.SpreadP < alpha:
		what = "the spread"
	}
	positive := true
	lx, ly := make([]float64, len(x)), make([]float64, len(y))
	for i := range x {
		if !(x[i] > 0 && y[i] > 0) {
			positive = false
			break
		}
		lx[i], ly[i] = math.Log(x[i]), math.Log(y[i])
	}
	if positive {
		if lr, err := RegressionBasedLimits(lx, ly, nil); err == nil {
			c.LogChecked = true
			c.LogProportionalP, c.LogSpreadP = lr.BiasSlopeP, lr.SpreadSlopeP
			if c.LogProportionalP >= alpha && c.LogSpreadP >= alpha {
				c.Form = FormRatio
				c.Reason = fmt.Sprintf("%s of the differences changes with the level, but not on the log scale (p = %.2g, %.2g): limits as ratios", what, c.LogProportionalP, c.LogSpreadP)
				return c, nil
			}
		}
	}
	c.Form = FormRegression
	c.Reason = fmt.Sprintf("%s of the differences changes with the level (p = %.2g, %.2g)%s: regression-based limits", what, c.ProportionalP, c.SpreadP,
		map[bool]string{true: " and the log scale does not remove it", false: ""}[c.LogChecked])
	return c, nil
}

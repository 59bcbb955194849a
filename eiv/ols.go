package eiv

import (
	"fmt"
	"math"
)

// Options are the settings shared by every estimator. A nil *Options means
// the defaults.
type Options struct {
	// Confidence is the level of the confidence intervals, in (0, 1).
	// Zero means DefaultConfidence (0.95).
	Confidence float64
}

func (o *Options) confidence() (float64, error) {
	if o == nil {
		return DefaultConfidence, nil
	}
	return checkConfidence(o.Confidence)
}

// OLS fits y = a + b·x by ordinary least squares of y on x, treating x as
// exact. Standard errors are the classical ones, from the residual variance
// with n−2 degrees of freedom; intervals use Student's t with n−2 df.
// Fit.Jackknife holds the leave-one-out standard errors. Values outside
// [2^-100, 2^100] in magnitude are fitted in rescaled units (see Scale).
func OLS(x, y []float64, opt *Options) (*Fit, error) { return ols(x, y, opt, true) }

// ols is OLS, with the jackknife only when jackknife is set.
func ols(x, y []float64, opt *Options, jackknife bool) (*Fit, error) {
	conf, err := opt.confidence()
	if err != nil {
		return nil, err
	}
	if err := checkXY(x, y); err != nil {
		return nil, err
	}
	sc := ScaleFor(x, y, nil, nil)
	xs, ys := sc.ScaleX(x), sc.ScaleY(y)
	m := centredMoments(xs, ys)
	b := m.sxy / m.sxx
	a := m.my - b*m.mx
	// Residual sum of squares, summed directly from the residuals rather than
	// as syy − b·sxy, which cancels badly for a near-perfect fit.
	ssr := residualSS(xs, ys, m, b)
	df := len(x) - 2
	s2 := ssr / float64(df)
	varB := s2 / m.sxx
	varA := s2 * (1/m.n + m.mx*m.mx/m.sxx)
	f := &Fit{
		Method:            MethodOLS,
		N:                 len(x),
		Confidence:        conf,
		ResidualSD:        math.Sqrt(s2),
		CovSlopeIntercept: -m.mx * varB,
		Centre:            &Centre{X: m.mx, Y: m.my, SE: math.Sqrt(s2 / m.n)},
		DOF:               df,
		Converged:         true,
		RSquared:          1,
	}
	if m.syy > 0 {
		// In [0, 1]: the rounding of 1 − ssr/s_yy can otherwise give −2e-16.
		f.RSquared = math.Min(1, math.Max(0, 1-ssr/m.syy))
	}
	t := tQuantile(conf, df)
	f.Slope = estimate(b, math.Sqrt(varB), t, conf, "t")
	f.Intercept = estimate(a, math.Sqrt(varA), t, conf, "t")
	if !allFinite(a, b, varA, varB, f.CovSlopeIntercept) {
		return nil, fmt.Errorf("%w: the line's slope or its variance leaves the double-precision range", ErrDegenerate)
	}
	if jackknife {
		if jk, err := demingJackknife(xs, ys, m, math.Inf(1), a, b, t, conf); err != nil {
			f.Warnings = append(f.Warnings, &Warning{Code: WarnJackknifeSkipped, Message: "ols: no jackknife: " + trimPrefix(err.Error())})
		} else {
			f.Jackknife = jk
		}
	}
	if w := perfectFit(ssr, m, b); w != nil {
		f.Warnings = append(f.Warnings, w)
	}
	sc.Unscale(f, false)
	if err := f.finite(); err != nil {
		return nil, err
	}
	return f, nil
}

func estimate(v, se, crit, conf float64, method string) Estimate {
	return Estimate{Value: v, SE: se, CI: symmetric(v, crit*se, conf, method)}
}

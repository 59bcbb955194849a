package eiv

import (
	"fmt"
	"math"
)

// DemingOptions are the settings of Deming and WeightedDeming. A nil
// *DemingOptions means the defaults.
type DemingOptions struct {
	Options
	// Lambda is the error-variance ratio λ = var(y error)/var(x error); for
	// WeightedDeming the ratio of the squared coefficients of variation.
	// Zero means 1 (orthogonal regression) and adds a WarnLambdaAssumed
	// warning; pass LambdaFromUncertainties when σx and σy are known.
	Lambda float64
	// MaxIter caps the reweighting iterations of WeightedDeming. Zero means 100.
	MaxIter int
	// Tol is the relative slope change at which WeightedDeming stops. Zero means 1e-12.
	Tol float64
	// Jackknife, when set, adds Deming's leave-one-out standard errors
	// (Fit.Jackknife; O(n) by downdating). WeightedDeming always computes
	// its jackknife, which is its standard error.
	Jackknife bool
	// JackknifeMaxN is the largest n for which WeightedDeming refits every
	// leave-one-out sample; above it the weights are held at their
	// full-sample values (an O(n) approximation, flagged by a warning).
	// Zero means 5000.
	JackknifeMaxN int
}

func (o *DemingOptions) resolve() (conf, lambda float64, assumed bool, err error) {
	if o == nil {
		o = &DemingOptions{}
	}
	if conf, err = o.Options.confidence(); err != nil {
		return
	}
	lambda = o.Lambda
	switch {
	case lambda == 0:
		lambda, assumed = 1, true
	case !(lambda > 0) || math.IsInf(lambda, 0):
		err = &OptionError{Option: "lambda", Reason: "must be a finite number greater than 0"}
	}
	return
}

// LambdaFromUncertainties returns λ = mean(σy²)/mean(σx²), the error-variance
// ratio implied by stated standard uncertainties (common practice for Deming
// regression when per-point uncertainties are known but roughly constant).
func LambdaFromUncertainties(sx, sy []float64) (float64, error) {
	if len(sx) != len(sy) || len(sx) == 0 {
		return 0, ErrLengthMismatch
	}
	if err := checkSigma(sx, len(sx), "sx"); err != nil {
		return 0, err
	}
	if err := checkSigma(sy, len(sy), "sy"); err != nil {
		return 0, err
	}
	var vx, vy float64
	for i := range sx {
		vx += sx[i] * sx[i]
		vy += sy[i] * sy[i]
	}
	if vx == 0 || vy == 0 {
		return 0, &OptionError{Option: "lambda", Reason: "σx and σy must not all be zero to derive λ"}
	}
	l := vy / vx
	if !allFinite(l) || l == 0 {
		return 0, &OptionError{Option: "lambda", Reason: "the uncertainties give no finite ratio"}
	}
	return l, nil
}

// RelativeLambdaFromUncertainties returns the ratio of squared coefficients
// of variation mean((σy/y)²)/mean((σx/x)²), the λ of WeightedDeming implied
// by stated uncertainties. Every x and y must be non-zero.
func RelativeLambdaFromUncertainties(x, y, sx, sy []float64) (float64, error) {
	if len(sx) != len(x) || len(sy) != len(y) || len(x) != len(y) {
		return 0, ErrLengthMismatch
	}
	var vx, vy float64
	for i := range x {
		if x[i] == 0 || y[i] == 0 {
			return 0, &PointError{Index: i, Field: "x", Err: ErrNonPositiveLevel}
		}
		vx += (sx[i] / x[i]) * (sx[i] / x[i])
		vy += (sy[i] / y[i]) * (sy[i] / y[i])
	}
	l := vy / vx
	if !allFinite(l) || !(l > 0) {
		return 0, &OptionError{Option: "lambda", Reason: "the uncertainties give no finite ratio of relative variances"}
	}
	return l, nil
}

// Deming fits y = a + b·x when both x and y carry errors whose variances
// have the known ratio λ (Deming 1943; closed form as in Fuller 1987, §1.3):
//
//	b = [s_yy − λ·s_xx + √((s_yy − λ·s_xx)² + 4λ·s_xy²)] / (2·s_xy)
//	a = ȳ − b·x̄
//
// λ = 1 is orthogonal regression. Standard errors are Fuller's (1987,
// Theorem 1.3.1) large-sample ones; with Jackknife set, Fit.Jackknife holds
// the leave-one-out standard errors and intervals (Linnet 1990). Intervals
// use t with n−2 df. The moments come from one pass over the data.
func Deming(x, y []float64, opt *DemingOptions) (*Fit, error) {
	conf, lambda, assumed, err := opt.resolve()
	if err != nil {
		return nil, err
	}
	m, err := checkedMoments(x, y)
	if err != nil {
		return nil, err
	}
	if m.sxy == 0 {
		return nil, fmt.Errorf("%w: x and y are uncorrelated, so the Deming slope is undefined", ErrDegenerate)
	}
	b := demingSlope(m.sxx, m.syy, m.sxy, lambda)
	a := m.my - b*m.mx
	n := len(x)
	df := n - 2
	// Fuller (1987) Theorem 1.3.1, from memory: with v = e − b·u the
	// equation error, σ_vv estimated from the residuals with n−2 df,
	// σ_uu = σ_vv/(λ + b²), σ_uv = −b·σ_uu and σ_xx = m_xy/b the variance of
	// the true x (written m_xx − σ_uu, which is the same number and is
	// defined at b = 0):
	//	V(b) = [σ_xx·σ_vv + σ_uu·σ_vv − σ_uv²] / ((n−1)·σ_xx²)
	//	V(a) = σ_vv/n + x̄²·V(b)
	// Σ(y − ȳ − b(x − x̄))² from the moments; its rounding error relative
	// to s_yy is ε, which matters only for a near-perfect line.
	ssr := math.Max(0, m.syy-2*b*m.sxy+b*b*m.sxx)
	svv := ssr / float64(df)
	suu := svv / (lambda + b*b)
	suv := -b * suu
	sxxTrue := m.sxx/float64(n-1) - ssr/float64(n-1)/(lambda+b*b)
	if !(sxxTrue > 0) {
		return nil, fmt.Errorf("%w: the spread of x does not exceed its estimated error", ErrDegenerate)
	}
	varB := (sxxTrue*svv + suu*svv - suv*suv) / (float64(n-1) * sxxTrue * sxxTrue)
	varA := svv/float64(n) + m.mx*m.mx*varB
	t := tQuantile(conf, df)
	f := &Fit{
		Method:            MethodDeming,
		N:                 n,
		Confidence:        conf,
		Slope:             estimate(b, math.Sqrt(varB), t, conf, "t"),
		Intercept:         estimate(a, math.Sqrt(varA), t, conf, "t"),
		CovSlopeIntercept: -m.mx * varB,
		ResidualSD:        math.Sqrt(svv),
		Lambda:            lambda,
		DOF:               df,
		Converged:         true,
	}
	if !allFinite(a, b, varA, varB) {
		return nil, fmt.Errorf("%w: the values overflow double precision", ErrDegenerate)
	}
	if opt != nil && opt.Jackknife {
		f.Jackknife = demingJackknife(x, y, m, lambda, a, b, t, conf)
	}
	if assumed {
		f.Warnings = append(f.Warnings, lambdaAssumed(MethodDeming))
	}
	if ssr <= 1e-15*m.syy {
		f.Warnings = append(f.Warnings, &Warning{Code: WarnPerfectFit,
			Message: "the points lie exactly on a line: standard errors are zero"})
	}
	if err := f.finite(); err != nil {
		return nil, err
	}
	return f, nil
}

func lambdaAssumed(m Method) *Warning {
	return &Warning{Code: WarnLambdaAssumed, Message: fmt.Sprintf(
		"%s: no error-variance ratio was given and no uncertainties were stated, so λ = 1 (equal error variances) was assumed", m)}
}

// demingJackknife computes leave-one-out Deming fits in O(n) by downdating
// the centred moments (each removal is exact: the weighted Welford update
// run backwards).
func demingJackknife(x, y []float64, m moments, lambda, a, b, t, conf float64) *Jackknife {
	n := len(x)
	bs := make([]float64, n)
	as := make([]float64, n)
	k := m.n / (m.n - 1)
	for i := range n {
		dx, dy := x[i]-m.mx, y[i]-m.my
		sxx := m.sxx - k*dx*dx
		syy := m.syy - k*dy*dy
		sxy := m.sxy - k*dx*dy
		mx := m.mx - dx/(m.n-1)
		my := m.my - dy/(m.n-1)
		bi := demingSlope(sxx, syy, sxy, lambda)
		bs[i] = bi
		as[i] = my - bi*mx
	}
	return jackknifeSummary(a, b, as, bs, t, conf)
}

// jackknifeSummary turns leave-one-out estimates into standard errors,
// a covariance and t intervals around the full-sample estimates:
//
//	SE = √((n−1)/n · Σ(θ_(i) − θ_(·))²)
func jackknifeSummary(a, b float64, as, bs []float64, t, conf float64) *Jackknife {
	n := float64(len(bs))
	var ma, mb float64
	for i := range bs {
		ma += as[i]
		mb += bs[i]
	}
	ma /= n
	mb /= n
	var saa, sbb, sab float64
	for i := range bs {
		da, db := as[i]-ma, bs[i]-mb
		saa += da * da
		sbb += db * db
		sab += da * db
	}
	f := (n - 1) / n
	seA, seB := math.Sqrt(f*saa), math.Sqrt(f*sbb)
	return &Jackknife{
		Slope:        estimate(b, seB, t, conf, "jackknife-t"),
		Intercept:    estimate(a, seA, t, conf, "jackknife-t"),
		Cov:          f * sab,
		SlopeLOO:     bs,
		InterceptLOO: as,
	}
}

// WeightedDeming fits y = a + b·x when the error standard deviations of x
// and y are proportional to the level (constant coefficients of variation
// whose squared ratio is λ), by Linnet's (1990, 1993) iterative reweighting:
// start from weights 1/((x+y)/2)², fit a weighted Deming line, estimate the
// true points
//
//	d_i = y_i − a − b·x_i,  x̂_i = x_i + b·d_i/(λ + b²),  ŷ_i = y_i − λ·d_i/(λ + b²)
//
// reweight with w_i = 1/((x̂_i + ŷ_i)/2)², and repeat until the slope changes
// by less than Tol (relative). Every x and y must be positive. Standard errors
// and intervals are the jackknife's (Linnet 1990), with t on n−2 df.
func WeightedDeming(x, y []float64, opt *DemingOptions) (*Fit, error) {
	conf, lambda, assumed, err := opt.resolve()
	if err != nil {
		return nil, err
	}
	if err := checkXY(x, y); err != nil {
		return nil, err
	}
	for i := range x {
		if !(x[i] > 0) {
			return nil, &PointError{Index: i, Field: "x", Err: ErrNonPositiveLevel}
		}
		if !(y[i] > 0) {
			return nil, &PointError{Index: i, Field: "y", Err: ErrNonPositiveLevel}
		}
	}
	wd := newWDeming(opt, lambda, len(x))
	a, b, iter, err := wd.line(x, y, 0, math.NaN())
	if err != nil {
		return nil, err
	}
	n := len(x)
	df := n - 2
	t := tQuantile(conf, df)
	f := &Fit{
		Method:     MethodWeightedDeming,
		N:          n,
		Confidence: conf,
		Lambda:     lambda,
		DOF:        df,
		Iterations: iter,
		Converged:  true,
	}
	maxN := 5000
	if opt != nil && opt.JackknifeMaxN > 0 {
		maxN = opt.JackknifeMaxN
	}
	var jk *Jackknife
	if n <= maxN {
		jk, err = wd.jackknife(x, y, a, b, t, conf)
		if err != nil {
			return nil, err
		}
	} else {
		jk = wd.jackknifeFixedWeights(x, y, a, b, t, conf)
		f.Warnings = append(f.Warnings, &Warning{Code: WarnJackknifeSkipped, Message: fmt.Sprintf(
			"weighted_deming: n = %d exceeds %d, so the jackknife held the weights at their full-sample values instead of refitting each leave-one-out sample", n, maxN)})
	}
	f.Jackknife = jk
	f.Slope = jk.Slope
	f.Intercept = jk.Intercept
	f.CovSlopeIntercept = jk.Cov
	if assumed {
		f.Warnings = append(f.Warnings, lambdaAssumed(MethodWeightedDeming))
	}
	if err := f.finite(); err != nil {
		return nil, err
	}
	return f, nil
}

// wDeming holds the settings and scratch space of the weighted Deming
// iteration, so that repeated fits (jackknife, bootstrap) allocate nothing.
type wDeming struct {
	lambda  float64
	tol     float64
	maxIter int
	w       []float64
}

func newWDeming(opt *DemingOptions, lambda float64, n int) *wDeming {
	wd := &wDeming{lambda: lambda, tol: 1e-12, maxIter: 100, w: make([]float64, n)}
	if opt != nil {
		if opt.Tol > 0 {
			wd.tol = opt.Tol
		}
		if opt.MaxIter > 0 {
			wd.maxIter = opt.MaxIter
		}
	}
	return wd
}

// weightedMoments returns the weighted centred moments of (x, y) with
// weights w; n holds Σw.
func weightedMoments(x, y, w []float64) moments {
	var sw, sx, sy float64
	for i := range x {
		sw += w[i]
		sx += w[i] * x[i]
		sy += w[i] * y[i]
	}
	m := moments{n: sw, mx: sx / sw, my: sy / sw}
	for i := range x {
		dx, dy := x[i]-m.mx, y[i]-m.my
		m.sxx += w[i] * dx * dx
		m.syy += w[i] * dy * dy
		m.sxy += w[i] * dx * dy
	}
	return m
}

// line runs the reweighting iteration on (x, y). (a0, b0), when b0 is not
// NaN, is the line whose adjusted points give the starting weights (a warm start).
func (wd *wDeming) line(x, y []float64, a0, b0 float64) (a, b float64, iter int, err error) {
	w := wd.w[:len(x)]
	lam := wd.lambda
	if math.IsNaN(b0) {
		for i := range x {
			m := (x[i] + y[i]) / 2
			w[i] = 1 / (m * m)
		}
	} else if err := wd.reweight(x, y, a0, b0, w); err != nil {
		return 0, 0, 0, err
	}
	prev := math.NaN()
	change := math.Inf(1)
	for iter = 1; iter <= wd.maxIter; iter++ {
		m := weightedMoments(x, y, w)
		if m.sxy == 0 {
			return 0, 0, iter, fmt.Errorf("%w: x and y are uncorrelated, so the Deming slope is undefined", ErrDegenerate)
		}
		b = demingSlope(m.sxx, m.syy, m.sxy, lam)
		a = m.my - b*m.mx
		if !allFinite(a, b) {
			return 0, 0, iter, fmt.Errorf("%w: the values overflow double precision", ErrDegenerate)
		}
		change = math.Abs(b - prev)
		if b != 0 {
			change /= math.Abs(b)
		}
		if change <= wd.tol {
			return a, b, iter, nil
		}
		prev = b
		if err := wd.reweight(x, y, a, b, w); err != nil {
			return 0, 0, iter, err
		}
	}
	return 0, 0, wd.maxIter, &ConvergenceError{Method: MethodWeightedDeming, Iterations: wd.maxIter, Change: change}
}

// reweight sets w_i = 1/((x̂_i + ŷ_i)/2)² from the points adjusted to the line (a, b).
func (wd *wDeming) reweight(x, y []float64, a, b float64, w []float64) error {
	lam := wd.lambda
	den := lam + b*b
	for i := range x {
		d := y[i] - a - b*x[i]
		m := (x[i] + b*d/den + y[i] - lam*d/den) / 2
		if !(m > 0) {
			return &PointError{Index: i, Field: "x", Err: fmt.Errorf(
				"%w: the point's level estimated on the line is not positive", ErrNonPositiveLevel)}
		}
		w[i] = 1 / (m * m)
	}
	return nil
}

// jackknife refits every leave-one-out sample, warm-started at the full fit.
func (wd *wDeming) jackknife(x, y []float64, a, b, t, conf float64) (*Jackknife, error) {
	n := len(x)
	bx := make([]float64, n-1)
	by := make([]float64, n-1)
	as := make([]float64, n)
	bs := make([]float64, n)
	for i := range n {
		copy(bx, x[:i])
		copy(bx[i:], x[i+1:])
		copy(by, y[:i])
		copy(by[i:], y[i+1:])
		ai, bi, _, err := wd.line(bx, by, a, b)
		if err != nil {
			return nil, fmt.Errorf("eiv: weighted_deming jackknife without point %d: %w", i+1, err)
		}
		as[i], bs[i] = ai, bi
	}
	return jackknifeSummary(a, b, as, bs, t, conf), nil
}

// jackknifeFixedWeights is the O(n) approximation used for large n: the
// weights stay at their full-sample values and each point is removed from
// the weighted moments by an exact downdate.
func (wd *wDeming) jackknifeFixedWeights(x, y []float64, a, b, t, conf float64) *Jackknife {
	n := len(x)
	w := wd.w[:n]
	_ = wd.reweight(x, y, a, b, w) // succeeded in the last iteration of line
	m := weightedMoments(x, y, w)
	as := make([]float64, n)
	bs := make([]float64, n)
	for i := range n {
		sw := m.n - w[i]
		dx, dy := x[i]-m.mx, y[i]-m.my
		k := w[i] * m.n / sw
		bi := demingSlope(m.sxx-k*dx*dx, m.syy-k*dy*dy, m.sxy-k*dx*dy, wd.lambda)
		mx := m.mx - w[i]*dx/sw
		my := m.my - w[i]*dy/sw
		bs[i] = bi
		as[i] = my - bi*mx
	}
	return jackknifeSummary(a, b, as, bs, t, conf)
}

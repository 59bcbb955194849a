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
	// Sums of squares kept as scale²·ssq: σ of any magnitude validation
	// accepts gives its ratio without over- or underflow.
	var vx, vy sumSquares
	for i := range sx {
		vx.add(sx[i])
		vy.add(sy[i])
	}
	if vx.scale == 0 || vy.scale == 0 {
		return 0, &OptionError{Option: "lambda", Reason: "σx and σy must not all be zero to derive λ"}
	}
	l, ok := vy.ratio(vx)
	if !ok {
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
	var vx, vy sumSquares
	for i := range x {
		if x[i] == 0 || y[i] == 0 {
			return 0, &PointError{Index: i, Field: "x", Err: ErrNonPositiveLevel}
		}
		vx.add(sx[i] / x[i])
		vy.add(sy[i] / y[i])
	}
	l, ok := vy.ratio(vx)
	if !ok {
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
// use t with n−2 df. The moments come from one pass over the data (two when
// the first row lies far from the rest); the residual sum of squares from
// the same pass, about a pilot slope, or from a pass over the residuals when
// that would lose digits (see moments.ssr). Values outside [2^-100, 2^100] in magnitude are
// fitted in units rescaled by powers of two (see Scale), so any data that
// pass validation are fitted.
func Deming(x, y []float64, opt *DemingOptions) (*Fit, error) {
	conf, lambda, assumed, err := opt.resolve()
	if err != nil {
		return nil, err
	}
	m, sc, err := checkedMoments(x, y, lambda)
	if err != nil {
		return nil, err
	}
	xs, ys, lam := x, y, lambda
	if !sc.IsZero() {
		xs, ys, lam = sc.ScaleX(x), sc.ScaleY(y), sc.Lambda(lambda)
		m = centredMoments(xs, ys)
	}
	f, err := demingFit(xs, ys, m, lam, conf, opt != nil && opt.Jackknife)
	if err != nil {
		return nil, err
	}
	sc.Unscale(f, false)
	f.Lambda = lambda
	if assumed {
		f.Warnings = append(f.Warnings, lambdaAssumed(MethodDeming))
	}
	if err := f.finite(); err != nil {
		return nil, err
	}
	return f, nil
}

// demingFit is Deming's fit on data inside the safe band, with moments m.
func demingFit(x, y []float64, m moments, lambda, conf float64, jack bool) (*Fit, error) {
	if m.sxy == 0 {
		return nil, fmt.Errorf("%w: x and y are uncorrelated, so the Deming slope is undefined", ErrDegenerate)
	}
	b := demingSlope(m.sxx, m.syy, m.sxy, lambda)
	a := m.my - b*m.mx
	n := len(x)
	df := n - 2
	// Fuller (1987) Theorem 1.3.1, from memory: with v = e − b·u the
	// equation error, σ_vv estimated from the residuals with n−2 df,
	// σ_uu = σ_vv/(λ + b²), σ_uv = −b·σ_uu and σ_xx = m_xx − σ_uu the
	// variance of the true x:
	//	V(b) = [σ_xx·σ_vv + σ_uu·σ_vv − σ_uv²] / ((n−1)·σ_xx²)
	//	     = σ_vv / ((n−1)·σ_xx) · [1 + σ_uu / (σ_xx·(1 + b²/λ))]
	//	V(a) = σ_vv/n + x̄²·V(b)
	// (the second form has no squares of moments, and λ = +Inf is OLS).
	// ŷ(x̄) = ȳ has variance σ_vv/n and no covariance with b.
	ssr := m.ssr(x, y, b)
	svv := ssr / float64(df)
	suu := svv / (lambda + b*b)
	sxxTrue := m.sxx/float64(n-1) - float64(df)*suu/float64(n-1)
	if !(sxxTrue > 0) {
		return nil, fmt.Errorf("%w: the spread of x does not exceed its estimated error", ErrDegenerate)
	}
	varB := svv / (float64(n-1) * sxxTrue) * (1 + suu/(sxxTrue*(1+b*b/lambda)))
	varA := svv/float64(n) + m.mx*m.mx*varB
	t := tQuantile(conf, df)
	fc := &struct { // the fit and its centre in one allocation
		f Fit
		c Centre
	}{c: Centre{X: m.mx, Y: m.my, SE: math.Sqrt(svv / float64(n))}}
	f := &fc.f
	*f = Fit{
		Method:            MethodDeming,
		N:                 n,
		Confidence:        conf,
		Slope:             estimate(b, math.Sqrt(varB), t, conf, "t"),
		Intercept:         estimate(a, math.Sqrt(varA), t, conf, "t"),
		CovSlopeIntercept: -m.mx * varB,
		Centre:            &fc.c,
		ResidualSD:        math.Sqrt(svv),
		Lambda:            lambda,
		DOF:               df,
		Converged:         true,
	}
	if !allFinite(a, b, varA, varB) {
		return nil, fmt.Errorf("%w: the line's slope or its variance leaves the double-precision range", ErrDegenerate)
	}
	if jack {
		jk, err := demingJackknife(x, y, m, lambda, a, b, t, conf)
		if err != nil {
			f.Warnings = append(f.Warnings, &Warning{Code: WarnJackknifeSkipped, Message: fmt.Sprintf("%s: no jackknife: %s", f.Method, trimPrefix(err.Error()))})
		} else {
			f.Jackknife = jk
		}
	}
	if w := perfectFit(ssr, m, b); w != nil {
		f.Warnings = append(f.Warnings, w)
	}
	return f, nil
}

// perfectFit warns when the residuals are zero, or at the level of the
// rounding of the data.
func perfectFit(ssr float64, m moments, b float64) *Warning {
	switch {
	case ssr == 0:
		return &Warning{Code: WarnPerfectFit, Message: "the points lie exactly on a line: standard errors are zero"}
	case ssr <= 1e-26*(m.syy+b*b*m.sxx):
		return &Warning{Code: WarnPerfectFit, Message: "the points lie on a line to within the rounding of double precision: the standard errors reflect rounding only"}
	}
	return nil
}

func lambdaAssumed(m Method) *Warning {
	return &Warning{Code: WarnLambdaAssumed, Message: fmt.Sprintf(
		"%s: no error-variance ratio was given and no uncertainties were stated, so λ = 1 (equal error variances) was assumed", m)}
}

// demingJackknife computes leave-one-out Deming fits (λ = +Inf: OLS) in
// O(n) by downdating the centred moments, each change of the slope by
// demingStep and of the line at x̄ as
//
//	ŷ_(i)(x̄) − ȳ = (−e_i + δ_i·(x_i − x̄)) / (n − 1)
//
// so that the spread of the leave-one-out lines keeps its digits however
// close the points lie to the line. A point whose removal the downdate
// cannot resolve (it dominates the spread) is refitted exactly.
func demingJackknife(x, y []float64, m moments, lambda, a, b, t, conf float64) (*Jackknife, error) {
	n := len(x)
	db := make([]float64, n)
	da := make([]float64, n)
	dc := make([]float64, n)
	k := m.n / (m.n - 1)
	g := 1 / (m.n - 1)
	for i := range n {
		dx, dy := dev(x[i], m.mx, m.lx), dev(y[i], m.my, m.ly)
		_, _, _, delta, ok := demingStep(m, dx, dy, k, lambda, b)
		var c, d float64
		if ok {
			c = g * (delta*dx - (dy - b*dx))
			d = c - delta*m.mx
		} else {
			mi := momentsWithout(x, y, i)
			if !(mi.sxx > 0) || (mi.sxy == 0 && !math.IsInf(lambda, 1)) {
				return nil, fmt.Errorf("%w: without point %d the data determine no line", ErrDegenerate, i+1)
			}
			bi := demingSlope(mi.sxx, mi.syy, mi.sxy, lambda)
			delta = bi - b
			c = ((mi.my - m.my) + (mi.ly - m.ly)) + bi*((m.mx-mi.mx)+(m.lx-mi.lx))
			// The intercept directly: c − δ·x̄ would cancel when x̄ is
			// far from the other points' mean; the rounding of a is common
			// to every point and leaves the spread alone.
			d = (mi.my - bi*mi.mx) - a
		}
		db[i], dc[i], da[i] = delta, c, d
	}
	return jackknifeDeltas(a, b, &Centre{X: m.mx, Y: m.my}, da, db, dc, t, conf)
}

// momentsWithout returns the centred moments of (x, y) without point skip,
// in two passes.
func momentsWithout(x, y []float64, skip int) moments {
	var sx, sy float64
	for i := range x {
		if i != skip {
			sx += x[i]
			sy += y[i]
		}
	}
	fn := float64(len(x) - 1)
	m := moments{n: fn, mx: sx / fn, my: sy / fn}
	var cx, cy, xx, yy, xy float64
	for i := range x {
		if i == skip {
			continue
		}
		dx, dy := x[i]-m.mx, y[i]-m.my
		cx += dx
		cy += dy
		xx += dx * dx
		yy += dy * dy
		xy += dx * dy
	}
	m.mx, m.lx = twoSum(m.mx, cx/fn)
	m.my, m.ly = twoSum(m.my, cy/fn)
	m.sxx, m.syy, m.sxy = xx-cx*cx/fn, yy-cy*cy/fn, xy-cx*cy/fn
	return m
}

// jackknifeDeltas turns the changes of intercept (da), slope (db) and the
// line at the centre c (dc) on leaving out each point into standard
// errors, covariances and t intervals around the full-sample estimates:
//
//	SE = √((n−1)/n · Σ(θ_(i) − θ_(·))²)
//
// It fills c.SE and c.Cov, and reuses da and db for the leave-one-out
// intercepts and slopes.
func jackknifeDeltas(a, b float64, c *Centre, da, db, dc []float64, t, conf float64) (*Jackknife, error) {
	n := float64(len(db))
	var ma, mb, mc float64
	for i := range db {
		ma += da[i]
		mb += db[i]
		mc += dc[i]
	}
	ma /= n
	mb /= n
	mc /= n
	var saa, sbb, scc, sab, scb float64
	for i := range db {
		ea, eb, ec := da[i]-ma, db[i]-mb, dc[i]-mc
		saa += ea * ea
		sbb += eb * eb
		scc += ec * ec
		sab += ea * eb
		scb += ec * eb
		da[i] += a
		db[i] += b
	}
	f := (n - 1) / n
	c.SE, c.Cov = math.Sqrt(f*scc), f*scb
	if !allFinite(saa, sbb, scc, sab, scb) {
		return nil, fmt.Errorf("%w: a leave-one-out line leaves the double-precision range", ErrDegenerate)
	}
	return &Jackknife{
		Slope:        estimate(b, math.Sqrt(f*sbb), t, conf, "jackknife-t"),
		Intercept:    estimate(a, math.Sqrt(f*saa), t, conf, "jackknife-t"),
		Cov:          f * sab,
		SlopeLOO:     db,
		InterceptLOO: da,
		Centre:       c,
	}, nil
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
	sc := levelScale(x, y)
	xs, ys := sc.ScaleX(x), sc.ScaleY(y)
	wd := newWDeming(opt, lambda, len(x))
	a, b, c, iter, err := wd.line(xs, ys, 0, math.NaN())
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
		ResidualSD: wd.relativeResidualSD(xs, ys, a, b),
	}
	maxN := 5000
	if opt != nil && opt.JackknifeMaxN > 0 {
		maxN = opt.JackknifeMaxN
	}
	var jk *Jackknife
	if n <= maxN {
		jk, err = wd.jackknife(xs, ys, a, b, c, t, conf)
	} else {
		jk, err = wd.jackknifeFixedWeights(xs, ys, a, b, c, t, conf)
		f.Warnings = append(f.Warnings, &Warning{Code: WarnJackknifeSkipped, Message: fmt.Sprintf(
			"weighted_deming: n = %d exceeds %d, so the jackknife held the weights at their full-sample values instead of refitting each leave-one-out sample", n, maxN)})
	}
	if err != nil {
		return nil, err
	}
	f.Jackknife = jk
	f.Slope = jk.Slope
	f.Intercept = jk.Intercept
	f.CovSlopeIntercept = jk.Cov
	f.Centre = jk.Centre
	sc.Unscale(f, true)
	if assumed {
		f.Warnings = append(f.Warnings, lambdaAssumed(MethodWeightedDeming))
	}
	if err := f.finite(); err != nil {
		return nil, err
	}
	return f, nil
}

// levelScale is the common power of two that centres the binary exponents
// of the (positive) x and y of weighted Deming on 1, when they reach
// beyond [2^-400, 2^400]: the inverse levels 1/((x̂ + ŷ)/2) and the
// weighted sums then stay inside double precision for any data that pass
// validation. x and y share one scale, since the level mixes them.
func levelScale(x, y []float64) Scale {
	lo, hi := math.Inf(1), 0.0
	for _, c := range [][]float64{x, y} {
		for _, v := range c {
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
	}
	if lo >= 0x1p-400 && hi <= 0x1p400 {
		return Scale{}
	}
	_, elo := math.Frexp(lo)
	_, ehi := math.Frexp(hi)
	e := (elo + ehi) / 2
	return Scale{X: e, Y: e}
}

// wDeming holds the settings and scratch space of the weighted Deming
// iteration, so that repeated fits (jackknife, bootstrap) allocate nothing.
// inv holds the inverse levels 1/((x̂ + ŷ)/2): the weights are their
// squares, used as (inv·(x − x̄))² in the second moments and normalised by
// the largest for the means, so that neither over- nor underflows.
type wDeming struct {
	lambda  float64
	tol     float64
	maxIter int
	inv     []float64
	invMax  float64
}

func newWDeming(opt *DemingOptions, lambda float64, n int) *wDeming {
	wd := &wDeming{lambda: lambda, tol: 1e-12, maxIter: 100, inv: make([]float64, n)}
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

// weightedMoments returns the moments of (x, y) with weights inv²: the
// means with the weights normalised by invMax² (n holds their sum Σq²,
// q = inv/invMax), the second moments Σ(inv·(x − x̄))²,... with the
// weights as they are (the slope depends on their ratios only).
func weightedMoments(x, y, inv []float64, invMax float64) moments {
	var sw, sx, sy float64
	for i := range x {
		q := inv[i] / invMax
		w := q * q
		sw += w
		sx += w * x[i]
		sy += w * y[i]
	}
	m := moments{n: sw, mx: sx / sw, my: sy / sw}
	for i := range x {
		u, v := inv[i]*(x[i]-m.mx), inv[i]*(y[i]-m.my)
		m.sxx += u * u
		m.syy += v * v
		m.sxy += u * v
	}
	return m
}

// line runs the reweighting iteration on (x, y). (a0, b0), when b0 is not
// NaN, is the line whose adjusted points give the starting weights (a warm
// start). c is the weighted mean (x̄, ȳ) of the last iteration, through
// which the line passes.
func (wd *wDeming) line(x, y []float64, a0, b0 float64) (a, b float64, c Centre, iter int, err error) {
	inv := wd.inv[:len(x)]
	lam := wd.lambda
	if math.IsNaN(b0) {
		wd.invMax = 0
		for i := range x {
			inv[i] = 2 / (x[i] + y[i])
			wd.invMax = math.Max(wd.invMax, inv[i])
		}
	} else if err := wd.reweight(x, y, a0, b0); err != nil {
		return 0, 0, c, 0, err
	}
	prev := math.NaN()
	change := math.Inf(1)
	for iter = 1; iter <= wd.maxIter; iter++ {
		m := weightedMoments(x, y, inv, wd.invMax)
		if m.sxy == 0 {
			return 0, 0, c, iter, fmt.Errorf("%w: x and y are uncorrelated, so the Deming slope is undefined", ErrDegenerate)
		}
		b = demingSlope(m.sxx, m.syy, m.sxy, lam)
		a = m.my - b*m.mx
		c = Centre{X: m.mx, Y: m.my}
		if !allFinite(a, b) {
			return 0, 0, c, iter, fmt.Errorf("%w: the line leaves the double-precision range", ErrDegenerate)
		}
		change = math.Abs(b - prev)
		if b != 0 {
			change /= math.Abs(b)
		}
		if change <= wd.tol {
			return a, b, c, iter, nil
		}
		prev = b
		if err := wd.reweight(x, y, a, b); err != nil {
			return 0, 0, c, iter, err
		}
	}
	return 0, 0, c, wd.maxIter, &ConvergenceError{Method: MethodWeightedDeming, Iterations: wd.maxIter, Change: change}
}

// reweight sets inv_i = 1/((x̂_i + ŷ_i)/2) from the points adjusted to the line (a, b).
func (wd *wDeming) reweight(x, y []float64, a, b float64) error {
	lam := wd.lambda
	den := lam + b*b
	inv := wd.inv[:len(x)]
	wd.invMax = 0
	for i := range x {
		d := y[i] - a - b*x[i]
		m := (x[i] + b*d/den + y[i] - lam*d/den) / 2
		if !(m > 0) {
			return &PointError{Index: i, Field: "x", Err: fmt.Errorf(
				"%w: the point's level estimated on the line is not positive", ErrNonPositiveLevel)}
		}
		inv[i] = 1 / m
		wd.invMax = math.Max(wd.invMax, inv[i])
	}
	return nil
}

// relativeResidualSD is √(Σ(e_i/level_i)²/(n−2)) with the weights of the
// iteration that gave the line (a, b).
func (wd *wDeming) relativeResidualSD(x, y []float64, a, b float64) float64 {
	var ss float64
	for i := range x {
		r := wd.inv[i] * (y[i] - a - b*x[i])
		ss += r * r
	}
	return math.Sqrt(ss / float64(len(x)-2))
}

// jackknife refits every leave-one-out sample, warm-started at the full
// fit, and records each refit's change of slope, intercept and line at the
// full sample's weighted mean c.
func (wd *wDeming) jackknife(x, y []float64, a, b float64, c Centre, t, conf float64) (*Jackknife, error) {
	n := len(x)
	bx := make([]float64, n-1)
	by := make([]float64, n-1)
	da := make([]float64, n)
	db := make([]float64, n)
	dc := make([]float64, n)
	for i := range n {
		copy(bx, x[:i])
		copy(bx[i:], x[i+1:])
		copy(by, y[:i])
		copy(by[i:], y[i+1:])
		ai, bi, ci, _, err := wd.line(bx, by, a, b)
		if err != nil {
			return nil, fmt.Errorf("eiv: weighted_deming jackknife without point %d: %w", i+1, err)
		}
		db[i] = bi - b
		dc[i] = (ci.Y - c.Y) + bi*(c.X-ci.X)
		da[i] = ai - a
	}
	return jackknifeDeltas(a, b, &c, da, db, dc, t, conf)
}

// jackknifeFixedWeights is the O(n) approximation used for large n: the
// weights stay at their full-sample values and each point is removed from
// the weighted moments by a downdate (demingStep, with the point's
// coordinates multiplied by its inverse level); a point the downdate
// cannot resolve is refitted.
func (wd *wDeming) jackknifeFixedWeights(x, y []float64, a, b float64, c Centre, t, conf float64) (*Jackknife, error) {
	n := len(x)
	inv := wd.inv[:n]
	if err := wd.reweight(x, y, a, b); err != nil {
		return nil, err
	}
	m := weightedMoments(x, y, inv, wd.invMax)
	c = Centre{X: m.mx, Y: m.my}
	da := make([]float64, n)
	db := make([]float64, n)
	dc := make([]float64, n)
	for i := range n {
		q := inv[i] / wd.invMax
		w := q * q
		dx, dy := x[i]-m.mx, y[i]-m.my
		k := m.n / (m.n - w)
		_, _, _, delta, ok := demingStep(m, inv[i]*dx, inv[i]*dy, k, wd.lambda, b)
		if ok {
			dc[i] = w / (m.n - w) * (delta*dx - (dy - b*dx))
			da[i] = dc[i] - delta*c.X
		} else {
			bx := append(append([]float64{}, x[:i]...), x[i+1:]...)
			by := append(append([]float64{}, y[:i]...), y[i+1:]...)
			ai, bi, ci, _, err := wd.line(bx, by, a, b)
			if err != nil {
				return nil, fmt.Errorf("eiv: weighted_deming jackknife without point %d: %w", i+1, err)
			}
			delta = bi - b
			dc[i] = (ci.Y - c.Y) + bi*(c.X-ci.X)
			da[i] = ai - a
			if err := wd.reweight(x, y, a, b); err != nil {
				return nil, err
			}
		}
		db[i] = delta
	}
	return jackknifeDeltas(a, b, &c, da, db, dc, t, conf)
}

package eiv

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// Scaling says how York's intervals use the goodness of fit.
type Scaling int

const (
	// ScaleBirge (the default) widens the interval by √MSWD when MSWD > 1
	// and never narrows it: half-width t(n−2)·SE·max(1, √MSWD).
	ScaleBirge Scaling = iota
	// ScaleNever trusts the stated uncertainties: half-width z·SE.
	ScaleNever
	// ScaleAlways lets the scatter set the size: half-width t(n−2)·SE·√MSWD.
	ScaleAlways
)

// YorkOptions are the settings of York. A nil *YorkOptions means the defaults.
type YorkOptions struct {
	Options
	// Tol is the relative slope change at which the iteration stops.
	// Zero means 1e-15.
	Tol float64
	// MaxIter caps the iterations. Zero means 1000.
	MaxIter int
	// Scaling chooses how the interval uses MSWD. The zero value is ScaleBirge.
	Scaling Scaling
	// Jackknife, when set, adds leave-one-out standard errors (n refits;
	// skipped with a warning when n > JackknifeMaxN).
	Jackknife bool
	// JackknifeMaxN bounds the jackknife's cost. Zero means 5000.
	JackknifeMaxN int
}

// York fits y = a + b·x to points with per-point standard uncertainties
// sx, sy and error correlations r (nil means 0) by the method of York,
// Evensen, López Martínez & De Basabe Delgado (2004, Am. J. Phys. 72:367),
// iterating
//
//	W_i = 1/(σy_i² + b²·σx_i² − 2·b·r_i·σx_i·σy_i)
//	X̄ = ΣW·X/ΣW,  Ȳ = ΣW·Y/ΣW,  U = X − X̄,  V = Y − Ȳ
//	β_i = W_i·[U_i·σy_i² + b·V_i·σx_i² − (b·U_i + V_i)·r_i·σx_i·σy_i]
//	b = ΣW·β·V / ΣW·β·U,  a = Ȳ − b·X̄
//
// (their Section III written with σ instead of ω = 1/σ², so that σx = 0
// is allowed and gives weighted least squares in y). The standard errors are
// York et al.'s, at the adjusted points x_i = X̄ + β_i, from the stated
// uncertainties alone:
//
//	σb² = 1/ΣW·(x − x̄)²,  σa² = 1/ΣW + x̄²·σb²,  cov(a, b) = −x̄·σb²
//
// SEScaled multiplies them by √MSWD with MSWD = S/(n−2), S = ΣW(Y − a − bX)².
// A point with σx = σy = 0 is an error.
func York(x, y, sx, sy, r []float64, opt *YorkOptions) (*Fit, error) {
	if opt == nil {
		opt = &YorkOptions{}
	}
	conf, err := opt.confidence()
	if err != nil {
		return nil, err
	}
	if err := checkYork(x, y, sx, sy, r); err != nil {
		return nil, err
	}
	yk := newYork(opt, len(x))
	res, err := yk.fit(x, y, sx, sy, r, math.NaN())
	if err != nil {
		return nil, err
	}
	n := len(x)
	df := n - 2
	f := &Fit{
		Method:            MethodYork,
		N:                 n,
		Confidence:        conf,
		CovSlopeIntercept: res.cov,
		Chi2:              res.s,
		DOF:               df,
		MSWD:              res.s / float64(df),
		PValue:            distuv.ChiSquared{K: float64(df)}.Survival(res.s),
		Iterations:        res.iter,
		Converged:         true,
	}
	sf := math.Sqrt(f.MSWD)
	var crit, widen float64
	var how string
	switch opt.Scaling {
	case ScaleNever:
		crit, widen, how = zQuantile(conf), 1, "normal"
	case ScaleAlways:
		crit, widen, how = tQuantile(conf, df), sf, "t, scaled by √MSWD"
	default:
		crit, widen, how = tQuantile(conf, df), math.Max(1, sf), "t, scaled by max(1, √MSWD)"
	}
	f.Slope = Estimate{Value: res.b, SE: res.seB, SEScaled: res.seB * sf,
		CI: symmetric(res.b, crit*widen*res.seB, conf, how)}
	f.Intercept = Estimate{Value: res.a, SE: res.seA, SEScaled: res.seA * sf,
		CI: symmetric(res.a, crit*widen*res.seA, conf, how)}
	if !allFinite(res.a, res.b, res.seA, res.seB, res.cov, res.s, f.PValue) {
		return nil, fmt.Errorf("%w: the values overflow double precision", ErrDegenerate)
	}
	if f.PValue < 0.05 {
		f.Warnings = append(f.Warnings, &Warning{Code: WarnScatterExceeds, Message: fmt.Sprintf(
			"york: the scatter about the line exceeds the stated uncertainties (MSWD = %.3g, p = %.2g); se_scaled is the more realistic uncertainty", f.MSWD, f.PValue)})
	}
	if opt.Jackknife {
		maxN := opt.JackknifeMaxN
		if maxN <= 0 {
			maxN = 5000
		}
		if n > maxN {
			f.Warnings = append(f.Warnings, &Warning{Code: WarnJackknifeSkipped, Message: fmt.Sprintf(
				"york: the jackknife was skipped because n = %d exceeds %d", n, maxN)})
		} else if n < 4 {
			f.Warnings = append(f.Warnings, &Warning{Code: WarnJackknifeSkipped,
				Message: "york: the jackknife needs at least 4 points"})
		} else if jk, err := yk.jackknife(x, y, sx, sy, r, res.a, res.b, tQuantile(conf, df), conf); err != nil {
			f.Warnings = append(f.Warnings, &Warning{Code: WarnJackknifeSkipped, Message: "york: no jackknife: " + trimPrefix(err.Error())})
		} else {
			f.Jackknife = jk
		}
	}
	return f, nil
}

func checkYork(x, y, sx, sy, r []float64) error {
	if err := checkXY(x, y); err != nil {
		return err
	}
	n := len(x)
	if sx == nil || sy == nil {
		return &OptionError{Option: "sx, sy", Reason: "york needs per-point uncertainties of x and y"}
	}
	if err := checkSigma(sx, n, "sx"); err != nil {
		return err
	}
	if err := checkSigma(sy, n, "sy"); err != nil {
		return err
	}
	if err := checkCorrelation(r, n); err != nil {
		return err
	}
	for i := range n {
		if sx[i] == 0 && sy[i] == 0 {
			return &PointError{Index: i, Field: "sy", Err: fmt.Errorf(
				"%w: sx and sy are both zero, which would give the point infinite weight", ErrInvalidUncertainty)}
		}
	}
	return nil
}

// york holds the settings and scratch of the York iteration.
type york struct {
	tol     float64
	maxIter int
	w       []float64
}

type yorkResult struct {
	a, b, seA, seB, cov, s float64
	iter                   int
}

func newYork(opt *YorkOptions, n int) *york {
	yk := &york{tol: 1e-15, maxIter: 1000, w: make([]float64, n)}
	if opt.Tol > 0 {
		yk.tol = opt.Tol
	}
	if opt.MaxIter > 0 {
		yk.maxIter = opt.MaxIter
	}
	return yk
}

// origin returns the unweighted means of x and y. The iteration works on
// x − x0 and y − y0, so that a large common offset in the data costs no
// precision in the centred sums (the subtraction is exact to one rounding
// and the same in every iteration).
func origin(x, y []float64) (x0, y0 float64) {
	for i := range x {
		x0 += x[i]
		y0 += y[i]
	}
	n := float64(len(x))
	return x0 / n, y0 / n
}

// weights fills w with York's W_i for slope b and returns ΣW and the
// weighted means X̄, Ȳ of the data relative to (x0, y0).
func (yk *york) weights(x, y, sx, sy, r []float64, x0, y0, b float64) (sw, mx, my float64, err error) {
	w := yk.w[:len(x)]
	var swx, swy float64
	for i := range x {
		vx, vy := sx[i]*sx[i], sy[i]*sy[i]
		d := vy + b*b*vx
		if r != nil {
			d -= 2 * b * r[i] * sx[i] * sy[i]
		}
		if !(d > 0) {
			return 0, 0, 0, &PointError{Index: i, Field: "sy", Err: fmt.Errorf(
				"%w: the point's combined variance about the line is zero", ErrDegenerate)}
		}
		wi := 1 / d
		w[i] = wi
		sw += wi
		swx += wi * (x[i] - x0)
		swy += wi * (y[i] - y0)
	}
	return sw, swx / sw, swy / sw, nil
}

// slopeLine returns only (a, b) and the iteration count; the hot path of
// the jackknife and bootstrap. b0, when not NaN, is the starting slope.
//
// The iteration stops when the relative slope change is at most Tol, or
// when it has reached the rounding floor of the data: the change is below
// 1e-12 and no longer shrinking, or the iterates cycle. Otherwise it stops
// at MaxIter with a *ConvergenceError.
func (yk *york) slopeLine(x, y, sx, sy, r []float64, b0 float64) (a, b float64, iter int, err error) {
	x0, y0 := origin(x, y)
	b = b0
	if math.IsNaN(b) {
		m := centredMoments(x, y)
		b = m.sxy / m.sxx
	}
	prev2 := math.NaN()
	change, prevChange := math.Inf(1), math.Inf(1)
	for iter = 1; iter <= yk.maxIter; iter++ {
		_, mx, my, err := yk.weights(x, y, sx, sy, r, x0, y0, b)
		if err != nil {
			return 0, 0, iter, err
		}
		w := yk.w[:len(x)]
		var num, den float64
		for i := range x {
			u, v := x[i]-x0-mx, y[i]-y0-my
			vx, vy := sx[i]*sx[i], sy[i]*sy[i]
			beta := u*vy + b*v*vx
			if r != nil {
				beta -= (b*u + v) * r[i] * sx[i] * sy[i]
			}
			beta *= w[i]
			num += w[i] * beta * v
			den += w[i] * beta * u
		}
		nb := num / den
		if !allFinite(nb) {
			return 0, 0, iter, fmt.Errorf("%w: the York iteration left the finite range", ErrDegenerate)
		}
		change = math.Abs(nb - b)
		if nb != 0 {
			change /= math.Abs(nb)
		}
		if change <= yk.tol || nb == prev2 || (change < 1e-12 && change >= prevChange) {
			return (y0 + my) - nb*(x0+mx), nb, iter, nil
		}
		prev2, b, prevChange = b, nb, change
	}
	return 0, 0, yk.maxIter, &ConvergenceError{Method: MethodYork, Iterations: yk.maxIter, Change: change}
}

// fit iterates to convergence and evaluates the standard errors and S.
func (yk *york) fit(x, y, sx, sy, r []float64, b0 float64) (yorkResult, error) {
	_, b, iter, err := yk.slopeLine(x, y, sx, sy, r, b0)
	if err != nil {
		return yorkResult{}, err
	}
	x0, y0 := origin(x, y)
	sw, mx, my, err := yk.weights(x, y, sx, sy, r, x0, y0, b)
	if err != nil {
		return yorkResult{}, err
	}
	w := yk.w[:len(x)]
	// Adjusted points x_i = X̄ + β_i (relative to x0); their weighted mean,
	// spread, and S.
	var swb, s float64
	for i := range x {
		u, v := x[i]-x0-mx, y[i]-y0-my
		beta := yorkBeta(u, v, b, sx[i], sy[i], rAt(r, i)) * w[i]
		swb += w[i] * beta
		e := v - b*u
		s += w[i] * e * e
	}
	xbar := mx + swb/sw // relative to x0
	var swuu float64
	for i := range x {
		u, v := x[i]-x0-mx, y[i]-y0-my
		beta := yorkBeta(u, v, b, sx[i], sy[i], rAt(r, i)) * w[i]
		d := mx + beta - xbar
		swuu += w[i] * d * d
	}
	xbar += x0
	varB := 1 / swuu
	varA := 1/sw + xbar*xbar*varB
	return yorkResult{a: (y0 + my) - b*(x0+mx), b: b, seA: math.Sqrt(varA), seB: math.Sqrt(varB),
		cov: -xbar * varB, s: s, iter: iter}, nil
}

func yorkBeta(u, v, b, sx, sy, r float64) float64 {
	return u*sy*sy + b*v*sx*sx - (b*u+v)*r*sx*sy
}

func rAt(r []float64, i int) float64 {
	if r == nil {
		return 0
	}
	return r[i]
}

// jackknife refits York without each point in turn, warm-started at b.
func (yk *york) jackknife(x, y, sx, sy, r []float64, a, b, t, conf float64) (*Jackknife, error) {
	n := len(x)
	buf := make([]float64, 5*(n-1))
	bx, by, bsx, bsy, br := buf[:n-1], buf[n-1:2*(n-1)], buf[2*(n-1):3*(n-1)], buf[3*(n-1):4*(n-1)], buf[4*(n-1):]
	if r == nil {
		br = nil
	}
	as := make([]float64, n)
	bs := make([]float64, n)
	drop := func(dst, src []float64, i int) {
		copy(dst, src[:i])
		copy(dst[i:], src[i+1:])
	}
	for i := range n {
		drop(bx, x, i)
		drop(by, y, i)
		drop(bsx, sx, i)
		drop(bsy, sy, i)
		if r != nil {
			drop(br, r, i)
		}
		ai, bi, _, err := yk.slopeLine(bx, by, bsx, bsy, br, b)
		if err != nil {
			return nil, fmt.Errorf("eiv: york jackknife without point %d: %w", i+1, err)
		}
		as[i], bs[i] = ai, bi
	}
	return jackknifeSummary(a, b, as, bs, t, conf), nil
}

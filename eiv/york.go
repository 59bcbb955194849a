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
	if err := f.finite(); err != nil {
		return nil, err
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
	if len(sx) != n || len(sy) != n {
		return ErrLengthMismatch
	}
	var mx, my float64
	for i := range n {
		a, b := sx[i], sy[i]
		if !(a-a == 0 && a >= 0 && b-b == 0 && b >= 0) || (a == 0 && b == 0) {
			if err := checkSigma(sx[i:i+1], 1, "sx"); err != nil {
				return pointAt(err, i)
			}
			if err := checkSigma(sy[i:i+1], 1, "sy"); err != nil {
				return pointAt(err, i)
			}
			return &PointError{Index: i, Field: "sy", Err: fmt.Errorf(
				"%w: sx and sy are both zero, which would give the point infinite weight", ErrInvalidUncertainty)}
		}
		if a > mx {
			mx = a
		}
		if b > my {
			my = b
		}
	}
	if outOfRange(mx) || outOfRange(my) {
		return ErrMagnitude
	}
	return checkCorrelation(r, n)
}

// pointAt moves a *PointError found on a one-element slice to index i.
func pointAt(err error, i int) error {
	if pe, ok := err.(*PointError); ok {
		pe.Index = i
	}
	return err
}

// york holds the settings and scratch of the York iteration.
type york struct {
	tol     float64
	maxIter int
	w       []float64
	// warm, when set, starts iterate at (cx, cy) and the given slope.
	warm   bool
	cx, cy float64
	// skip, when skipping, is a point the passes leave out (the
	// jackknife's, without copying the data).
	skipping bool
	skip     int
}

type yorkResult struct {
	a, b, seA, seB, cov, s float64
	iter                   int
}

func newYork(opt *YorkOptions, n int) *york {
	yk := &york{tol: 1e-15, maxIter: 1000}
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
	if cap(yk.w) < len(x) {
		yk.w = make([]float64, len(x))
	}
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
// Each iteration is one pass over the data. With the points taken relative
// to the previous iteration's weighted centroid c (X′ = X − c_x, Y′ = Y − c_y)
// and δ = ΣW·X′/ΣW (and likewise for y) the small remaining shift,
// York's β_i = W_i(α_i·U_i + γ_i·V_i) with α = σy² − b·ρ, γ = b·σx² − ρ,
// ρ = r·σx·σy, U = X′ − δx, V = Y′ − δy, so that
//
//	ΣWβV = ΣW²α(X′Y′) − δy·ΣW²αX′ − δx·ΣW²αY′ + δxδy·ΣW²α + ΣW²γY′² − 2δy·ΣW²γY′ + δy²·ΣW²γ
//
// and likewise ΣWβU: thirteen sums gathered in one pass. As the iteration
// converges, c tends to the centroid and δ to zero, so the corrections
// cost no precision.
//
// The iteration stops when the relative slope change is at most Tol, or
// when it has reached the rounding floor of the data: the change is below
// 1e-12 and no longer shrinking, or the iterates cycle. Otherwise it stops
// at MaxIter with a *ConvergenceError.
func (yk *york) slopeLine(x, y, sx, sy, r []float64, b0 float64) (a, b float64, iter int, err error) {
	a, b, _, _, iter, err = yk.iterate(x, y, sx, sy, r, b0)
	return
}

// yorkStart returns the unweighted means and a starting slope: Deming's
// with λ = Σσy²/Σσx² (OLS when every σx is 0), from one pass.
func yorkStart(x, y, sx, sy []float64) (cx, cy, b float64) {
	n := len(x)
	y, sx, sy = y[:n], sx[:n], sy[:n]
	x0, y0 := x[0], y[0]
	var s1, s2, sxx, syy, sxy, vx, vy float64
	for i := range n {
		dx, dy := x[i]-x0, y[i]-y0
		s1 += dx
		s2 += dy
		sxx += dx * dx
		syy += dy * dy
		sxy += dx * dy
		vx += sx[i] * sx[i]
		vy += sy[i] * sy[i]
	}
	fn := float64(n)
	mx, my := s1/fn, s2/fn
	sxx, syy, sxy = sxx-s1*mx, syy-s2*my, sxy-s1*my
	lambda := math.Inf(1)
	if vx > 0 {
		lambda = vy / vx
	}
	b = sxy / sxx
	if sxy != 0 && lambda > 0 {
		b = demingSlope(sxx, syy, sxy, lambda)
	}
	if !allFinite(b) {
		b = sxy / sxx
	}
	return x0 + mx, y0 + my, b
}

// iterate runs the York iteration and returns the line with the weighted
// centroid (cx, cy) of its last pass.
func (yk *york) iterate(x, y, sx, sy, r []float64, b0 float64) (a, b, cx, cy float64, iter int, err error) {
	if yk.warm && !math.IsNaN(b0) {
		// A warm start (the jackknife): the full sample's centroid is close
		// enough, and the first pass measures the remaining shift.
		cx, cy, b = yk.cx, yk.cy, b0
	} else {
		cx, cy, b = yorkStart(x, y, sx, sy)
		if !math.IsNaN(b0) {
			b = b0
		}
	}
	if !allFinite(b) {
		return 0, 0, 0, 0, 0, fmt.Errorf("%w: no starting slope (x is constant)", ErrDegenerate)
	}
	prev2 := math.NaN()
	var pb, pg float64 // the previous slope and its image g(pb)
	change, prevChange := math.Inf(1), math.Inf(1)
	for iter = 1; iter <= yk.maxIter; iter++ {
		var s yorkSums
		if yk.skipping {
			s, err = yk.passSkipping(x, y, sx, sy, r, cx, cy, b)
		} else if r == nil {
			s, err = yorkPass(x, y, sx, sy, cx, cy, b)
		} else {
			s, err = yorkPassR(x, y, sx, sy, r, cx, cy, b)
		}
		if err != nil {
			return 0, 0, 0, 0, iter, err
		}
		dx, dy := s.wx/s.w, s.wy/s.w
		num := s.num - dy*s.aX - dx*s.aY + dx*dy*s.a - 2*dy*s.gY + dy*dy*s.g
		den := s.den - 2*dx*s.aX + dx*dx*s.a - dy*s.gX - dx*s.gY + dx*dy*s.g
		nb := num / den
		if !allFinite(nb) {
			return 0, 0, 0, 0, iter, fmt.Errorf("%w: the York iteration left the finite range", ErrDegenerate)
		}
		cx, cy = cx+dx, cy+dy // the weighted centroid for slope b
		change = math.Abs(nb - b)
		if nb != 0 {
			change /= math.Abs(nb)
		}
		if change <= yk.tol || nb == prev2 || (change < 1e-12 && change >= prevChange) {
			return cy - nb*cx, nb, cx, cy, iter, nil
		}
		// York's map g converges linearly; a secant step on g(b) − b from
		// the last two evaluations converges superlinearly. It is taken only
		// when it stays within the plain step's reach, else the plain step.
		next := nb
		if iter > 1 {
			f0, f1 := pg-pb, nb-b
			if den := f1 - f0; den != 0 {
				if sb := b - f1*(b-pb)/den; math.Abs(sb-nb) <= 2*math.Abs(nb-b) && allFinite(sb) {
					next = sb
				}
			}
		}
		pb, pg = b, nb
		prev2, b, prevChange = b, next, change
	}
	return 0, 0, 0, 0, yk.maxIter, &ConvergenceError{Method: MethodYork, Iterations: yk.maxIter, Change: change}
}

// yorkSums are the sums of one York pass (see slopeLine).
type yorkSums struct {
	w, wx, wy float64
	num, den  float64 // ΣW²(αX′Y′ + γY′²), ΣW²(αX′² + γX′Y′)
	a, aX, aY float64 // ΣW²α, ΣW²αX′, ΣW²αY′
	g, gX, gY float64 // ΣW²γ, ΣW²γX′, ΣW²γY′
}

// plus adds the sums of two parts of the data.
func (s yorkSums) plus(o yorkSums) yorkSums {
	return yorkSums{s.w + o.w, s.wx + o.wx, s.wy + o.wy, s.num + o.num, s.den + o.den,
		s.a + o.a, s.aX + o.aX, s.aY + o.aY, s.g + o.g, s.gX + o.gX, s.gY + o.gY}
}

// passSkipping is one pass over the data without point yk.skip: the sums
// of the points before it and of those after it.
func (yk *york) passSkipping(x, y, sx, sy, r []float64, cx, cy, b float64) (yorkSums, error) {
	k := yk.skip
	part := func(lo, hi int) (yorkSums, error) {
		if r == nil {
			return yorkPass(x[lo:hi], y[lo:hi], sx[lo:hi], sy[lo:hi], cx, cy, b)
		}
		return yorkPassR(x[lo:hi], y[lo:hi], sx[lo:hi], sy[lo:hi], r[lo:hi], cx, cy, b)
	}
	s1, err := part(0, k)
	if err != nil {
		return s1, err
	}
	s2, err := part(k+1, len(x))
	return s1.plus(s2), err
}

// yorkPass gathers the sums for uncorrelated errors (ρ = 0: α = σy², γ = b·σx²).
func yorkPass(x, y, sx, sy []float64, cx, cy, b float64) (s yorkSums, err error) {
	y, sx, sy = y[:len(x)], sx[:len(x)], sy[:len(x)] // one bounds check here, none in the loop
	b2 := b * b
	for i := range x {
		vx, vy := sx[i]*sx[i], sy[i]*sy[i]
		d := vy + b2*vx
		if !(d > 0) {
			return s, &PointError{Index: i, Field: "sy", Err: fmt.Errorf(
				"%w: the point's combined variance about the line is zero", ErrDegenerate)}
		}
		w := 1 / d
		xp, yp := x[i]-cx, y[i]-cy
		w2 := w * w
		al, ga := w2*vy, w2*b*vx
		t := xp * yp
		s.w += w
		s.wx += w * xp
		s.wy += w * yp
		s.num += al*t + ga*yp*yp
		s.den += al*xp*xp + ga*t
		s.a += al
		s.aX += al * xp
		s.aY += al * yp
		s.g += ga
		s.gX += ga * xp
		s.gY += ga * yp
	}
	return s, nil
}

// yorkPassR gathers the sums for correlated errors.
func yorkPassR(x, y, sx, sy, r []float64, cx, cy, b float64) (s yorkSums, err error) {
	y, sx, sy, r = y[:len(x)], sx[:len(x)], sy[:len(x)], r[:len(x)]
	b2 := b * b
	for i := range x {
		vx, vy := sx[i]*sx[i], sy[i]*sy[i]
		rho := r[i] * sx[i] * sy[i]
		d := vy + b2*vx - 2*b*rho
		if !(d > 0) {
			return s, &PointError{Index: i, Field: "sy", Err: fmt.Errorf(
				"%w: the point's combined variance about the line is zero", ErrDegenerate)}
		}
		w := 1 / d
		xp, yp := x[i]-cx, y[i]-cy
		w2 := w * w
		al, ga := w2*(vy-b*rho), w2*(b*vx-rho)
		t := xp * yp
		s.w += w
		s.wx += w * xp
		s.wy += w * yp
		s.num += al*t + ga*yp*yp
		s.den += al*xp*xp + ga*t
		s.a += al
		s.aX += al * xp
		s.aY += al * yp
		s.g += ga
		s.gX += ga * xp
		s.gY += ga * yp
	}
	return s, nil
}

// fit iterates to convergence and evaluates, in one more pass, the
// standard errors and S. Relative to the converged centroid c (U = X − c_x,
// V = Y − c_y, with weighted means δu, δv that are zero up to rounding):
//
//	S = ΣW(V − bU)² − ΣW·(δv − b·δu)²
//	Σ W(x_adj − x̄_adj)² = ΣWβ² − (ΣWβ)²/ΣW,  x̄_adj = c_x + δu + ΣWβ/ΣW
func (yk *york) fit(x, y, sx, sy, r []float64, b0 float64) (yorkResult, error) {
	_, b, cx, cy, iter, err := yk.iterate(x, y, sx, sy, r, b0)
	if err != nil {
		return yorkResult{}, err
	}
	yk.cx, yk.cy = cx, cy
	y, sx, sy = y[:len(x)], sx[:len(x)], sy[:len(x)]
	var sw, su, sv, sb, sbb, sr float64
	for i := range x {
		vx, vy := sx[i]*sx[i], sy[i]*sy[i]
		rho := 0.0
		if r != nil {
			rho = r[i] * sx[i] * sy[i]
		}
		w := 1 / (vy + b*b*vx - 2*b*rho)
		u, v := x[i]-cx, y[i]-cy
		beta := w * (u*(vy-b*rho) + v*(b*vx-rho))
		e := v - b*u
		sw += w
		su += w * u
		sv += w * v
		sb += w * beta
		sbb += w * beta * beta
		sr += w * e * e
	}
	du, dv := su/sw, sv/sw
	mx, my := cx+du, cy+dv
	s := sr - sw*(dv-b*du)*(dv-b*du)
	xbar := mx + sb/sw
	swuu := sbb - sb*sb/sw
	varB := 1 / swuu
	varA := 1/sw + xbar*xbar*varB
	return yorkResult{a: my - b*mx, b: b, seA: math.Sqrt(varA), seB: math.Sqrt(varB),
		cov: -xbar * varB, s: math.Max(s, 0), iter: iter}, nil
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
//
// The leave-one-out fits start from the full fit's centroid and slope and
// stop at a relative slope change of 1e-12: the jackknife's spread is of
// the order of the SE, many orders above that.
func (yk *york) jackknife(x, y, sx, sy, r []float64, a, b, t, conf float64) (*Jackknife, error) {
	jk := &york{tol: max(yk.tol, 1e-12), maxIter: yk.maxIter, warm: true, cx: yk.cx, cy: yk.cy, skipping: true}
	n := len(x)
	as := make([]float64, n)
	bs := make([]float64, n)
	for i := range n {
		jk.skip = i
		ai, bi, _, err := jk.slopeLine(x, y, sx, sy, r, b)
		if err != nil {
			return nil, fmt.Errorf("eiv: york jackknife without point %d: %w", i+1, err)
		}
		as[i], bs[i] = ai, bi
	}
	return jackknifeSummary(a, b, as, bs, t, conf), nil
}

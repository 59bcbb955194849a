package eiv

import (
	"fmt"
	"math"
	"strings"

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
//
// York's line is the global minimiser of S over the slope. The iteration
// finds a stationary point of S; the fit checks that it is a minimum
// (d²S/db² > 0, from the closing pass). When it is not, or when the errors
// of an axis are comparable to its spread (where S can have several local
// minima), the global search evaluates S over the slope angle, polishes
// every local minimum and returns the lowest, with a WarnSeveralMinima
// warning when there is more than one.
//
// The fit is scale-free: data of extreme magnitude are rescaled internally
// by exact powers of two and the line, SEs and covariance scaled back, so
// every scale that validation accepts (1e-150 … 1e150) fits.
func York(x, y, sx, sy, r []float64, opt *YorkOptions) (*Fit, error) {
	if opt == nil {
		opt = &YorkOptions{}
	}
	conf, err := opt.confidence()
	if err != nil {
		return nil, err
	}
	start, err := checkYork(x, y, sx, sy, r)
	if err != nil {
		return nil, err
	}
	yk := newYork(opt, len(x))
	xs, ys, sxs, sys, st, kx, ky := yk.rescaleFrom(x, y, sx, sy, start)
	ln, err := yk.solve(xs, ys, sxs, sys, r, st)
	if err != nil {
		return nil, err
	}
	if !ln.scanned && (ln.minimum < 0 || ln.minimum == 0 && !(curvature(xs, ys, sxs, sys, r, ln) > 0)) {
		// A stationary point that is not a minimum: search globally.
		if g, err := yk.scan(xs, ys, sxs, sys, r, st); err == nil {
			g.iter += ln.iter
			ln = g
		}
	}
	res := closing(xs, ys, sxs, sys, r, ln)
	yk.cx, yk.cy = ln.cx, ln.cy
	// Back to the data's units: x = x′/kx, y = y′/ky (exact powers of two).
	bk, ak := kx/ky, 1/ky
	n := len(x)
	df := n - 2
	f := &Fit{
		Method:            MethodYork,
		N:                 n,
		Confidence:        conf,
		CovSlopeIntercept: res.cov * bk * ak,
		Chi2:              res.s,
		DOF:               df,
		MSWD:              res.s / float64(df),
		PValue:            distuv.ChiSquared{K: float64(df)}.Survival(res.s),
		Iterations:        ln.iter,
		Converged:         true,
	}
	b, seB, a, seA := res.b*bk, res.seB*bk, res.a*ak, res.seA*ak
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
	f.Slope = Estimate{Value: b, SE: seB, SEScaled: seB * sf, CI: symmetric(b, crit*widen*seB, conf, how)}
	f.Intercept = Estimate{Value: a, SE: seA, SEScaled: seA * sf, CI: symmetric(a, crit*widen*seA, conf, how)}
	// Predictions are formed about the weighted centre of the adjusted x,
	// where var(ŷ) = 1/ΣW and cov(ŷ, b) = 0, so they keep their digits far
	// from the origin (the critical value, widened as the slope's, is
	// applied by At).
	f.Centre = &Centre{X: res.xbar / kx, Y: res.ycentre * ak, SE: res.seCentre * ak}
	if !allFinite(res.a, res.b, res.seA, res.seB, res.cov, res.s, f.PValue) || !(res.seB > 0) {
		return nil, fmt.Errorf("%w: york's line is not determined (the weighted spread of the adjusted x is zero or not finite)", ErrDegenerate)
	}
	if !allFinite(a, b, seA, seB, f.CovSlopeIntercept) || (b == 0) != (res.b == 0) || seB == 0 {
		return nil, fmt.Errorf("%w: york's slope, intercept or their covariance lies outside double precision in the data's units (x and y differ too much in scale); rescale the units", ErrDegenerate)
	}
	if ln.scanned && len(yk.minima) > 1 {
		f.Warnings = append(f.Warnings, &Warning{Code: WarnSeveralMinima, Message: severalMinima(yk.minima, res.b, bk)})
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
		} else if as, bs, err := yk.jackknife(xs, ys, sxs, sys, r, res.b, st); err != nil {
			f.Warnings = append(f.Warnings, &Warning{Code: WarnJackknifeSkipped, Message: "york: no jackknife: " + trimPrefix(err.Error())})
		} else {
			for i := range as {
				as[i], bs[i] = as[i]*ak, bs[i]*bk
			}
			f.Jackknife = jackknifeSummary(a, b, as, bs, tQuantile(conf, df), conf)
		}
	}
	if err := f.finite(); err != nil {
		return nil, err
	}
	return f, nil
}

// WarnSeveralMinima: York's S has more than one local minimum over the
// slope; the fit reports the lowest, and the message lists the others.
const WarnSeveralMinima = "several_minima"

// severalMinima describes the local minima of S (slopes in scaled units,
// multiplied by bk) and which was chosen.
func severalMinima(ms []yorkMin, chosen, bk float64) string {
	var best yorkMin
	var others []string
	for _, m := range ms {
		if m.b == chosen {
			best = m
		} else {
			others = append(others, fmt.Sprintf("b = %.6g (χ² = %.6g)", m.b*bk, m.s))
		}
	}
	return fmt.Sprintf("york: S has %d local minima over the slope; the fit reports the lowest, b = %.6g (χ² = %.6g); the others: %s",
		len(ms), best.b*bk, best.s, strings.Join(others, ", "))
}

// checkYork validates York's data and returns the start pass's sums
// (startAll's, bit for bit: the same rows in the same chunks, added in the
// same order), gathered in the same pass while each chunk is in cache.
func checkYork(x, y, sx, sy, r []float64) (startSums, error) {
	n := len(x)
	if len(y) != n {
		return startSums{}, ErrLengthMismatch
	}
	if n < 3 {
		return startSums{}, ErrTooFewPoints
	}
	if sx == nil || sy == nil || len(sx) != n || len(sy) != n {
		if err := checkXY(x, y); err != nil {
			return startSums{}, err
		}
		if sx == nil || sy == nil {
			return startSums{}, &OptionError{Option: "sx, sy", Reason: "york needs per-point uncertainties of x and y"}
		}
		return startSums{}, ErrLengthMismatch
	}
	// One pass over the four columns (chunked for large n); the answer is
	// that of checking x and y first and then the σ, row by row.
	var c yorkCheck
	if n < yorkParallelMinN {
		c = checkYorkRows(x, y, sx, sy, 0, n)
	} else {
		c, _ = chunkedSum(n, func(lo, hi int) (yorkCheck, error) {
			return checkYorkRows(x, y, sx, sy, lo, hi), nil
		}, yorkCheck.plus)
	}
	if err := c.xy.verdict(); err != nil {
		return startSums{}, err
	}
	if c.serr != nil {
		return startSums{}, c.serr
	}
	if outOfRange(c.smx) || outOfRange(c.smy) {
		return startSums{}, ErrMagnitude
	}
	return c.start, checkCorrelation(r, n)
}

// checkYorkRows is checkYork's pass over rows [lo, hi), error indices
// absolute.
func checkYorkRows(x, y, sx, sy []float64, lo, hi int) yorkCheck {
	c := yorkCheck{xy: scanXY(x[lo:hi], y[lo:hi], x[0])}
	c.smx, c.smy, c.serr = scanYorkSigma(sx[lo:hi], sy[lo:hi])
	if c.xy.err == nil && c.serr == nil {
		c.start = startPart(x[lo:hi], y[lo:hi], sx[lo:hi], sy[lo:hi], x[0], y[0])
	}
	if pe, ok := c.xy.err.(*PointError); ok {
		pe.Index += lo
	}
	if pe, ok := c.serr.(*PointError); ok {
		pe.Index += lo
	}
	return c
}

// yorkCheck is what checkYork's pass learns of a run of rows.
type yorkCheck struct {
	xy       xyScan
	smx, smy float64 // the largest σx and σy
	serr     error   // the first invalid σ
	start    startSums
}

// plus combines two consecutive runs of rows: the first error of each kind.
func (c yorkCheck) plus(o yorkCheck) yorkCheck {
	if c.xy.err == nil {
		if o.xy.err != nil {
			c.xy = o.xy
		} else {
			c.xy = xyScan{mx: max(c.xy.mx, o.xy.mx), my: max(c.xy.my, o.xy.my), constant: c.xy.constant && o.xy.constant}
		}
	}
	if c.serr == nil {
		c.serr = o.serr
	}
	c.smx, c.smy = max(c.smx, o.smx), max(c.smy, o.smy)
	c.start = c.start.plus(o.start)
	return c
}

// scanYorkSigma returns the largest σx and σy and the first point whose σ
// is invalid (not finite, negative, or both zero), its index relative to
// the slices.
func scanYorkSigma(sx, sy []float64) (mx, my float64, err error) {
	sy = sy[:len(sx)]
	for i := range sx {
		a, b := sx[i], sy[i]
		if !(a-a == 0 && a >= 0 && b-b == 0 && b >= 0) || (a == 0 && b == 0) {
			if err := checkSigma(sx[i:i+1], 1, "sx"); err != nil {
				return mx, my, pointAt(err, i)
			}
			if err := checkSigma(sy[i:i+1], 1, "sy"); err != nil {
				return mx, my, pointAt(err, i)
			}
			return mx, my, &PointError{Index: i, Field: "sy", Err: fmt.Errorf(
				"%w: sx and sy are both zero, which would give the point infinite weight", ErrInvalidUncertainty)}
		}
		if a > mx {
			mx = a
		}
		if b > my {
			my = b
		}
	}
	return mx, my, nil
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
	// skip, when skipping, is a point the passes leave out (the
	// jackknife's, without copying the data).
	skipping bool
	skip     int
	// first, when set, has the terms every refit's first pass shares.
	first *jackFirst
	// cx, cy are the weighted centroid of the last fit (the jackknife's warm start).
	cx, cy float64
	// scaled holds the rescaled copy of data of extreme magnitude.
	scaled []float64
	// grid and minima are the scratch of the global search.
	grid   []float64
	minima []yorkMin
}

// yorkMin is a local minimum of S found by the global search.
type yorkMin struct{ b, s float64 }

// yorkLine is a York slope with the weighted centroid (cx, cy) of its
// last pass; scanned says the global search ran, and then yk.minima lists
// the local minima it found.
type yorkLine struct {
	b, cx, cy float64
	iter      int
	scanned   bool
	// minimum is +1 when the iteration's last secant slope shows the
	// fixed point to be a minimum of S, −1 when it shows a maximum, and 0
	// when the iteration had no secant step long enough to tell.
	minimum int
}

type yorkResult struct {
	a, b, seA, seB, cov, s float64
	// xbar is the weighted mean of the adjusted x; the line's value there
	// has variance 1/ΣW and no covariance with b (York et al. 2004).
	xbar, ycentre, seCentre float64
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

// yorkStartInfo is what the start pass learns about the data.
type yorkStartInfo struct {
	cx, cy, b float64 // the unweighted means and a starting slope
	// ordinary says the data's scale needs no rescaling: the root mean
	// square σ of each axis (its spread when every σ of the axis is zero)
	// lies in [2⁻⁵⁰, 2⁵⁰], so that York's W² stays far from the limits of
	// double precision.
	ordinary bool
	// hard says an axis's errors are comparable to its spread
	// (Σσ² ≥ yorkHardRatio·Σ(v − v̄)²): S may then have several local minima
	// over the slope, and York's line is found by the global search.
	hard bool
	// kappa = √(Σσy²/Σσx²) is the slope of the scan's unit angle: the
	// global search works in units where the typical error is round.
	kappa float64
}

// yorkHardRatio is the share Σσ²/Σ(v − v̄)² of an axis from which the data
// count as hard. With errors well below the spread on both axes S has a
// single minimum near the line through the points: every other direction
// costs S of the order of (spread/σ)² per point, and what other local
// minima there are lie far above (S of 10⁴ beside 40, in narrow dips near
// the axes), where no iteration started from Deming's line goes. In 4,000
// random datasets (the property test's kind, ratios 10⁻⁴ … 1) a second
// minimum within 25 of the global one appeared only from a share of 0.2;
// 1/16 leaves a factor of three. Below it, the iteration's own check that
// it stopped at a minimum suffices.
const yorkHardRatio = 1.0 / 16

// yorkStart returns the unweighted means and a starting slope: Deming's
// with λ = Σσy²/Σσx² (OLS when every σx is 0), from one pass; and whether
// the data are of ordinary scale and hard.
func yorkStart(x, y, sx, sy []float64) yorkStartInfo {
	return startFrom(x[0], y[0], len(x), startAll(x, y, sx, sy, x[0], y[0]))
}

// startFrom is yorkStart from the start pass's sums ss about (x0, y0) over
// n points.
func startFrom(x0, y0 float64, n int, ss startSums) (st yorkStartInfo) {
	s1, s2, sxx, syy, sxy, vx, vy := ss.s1, ss.s2, ss.sxx, ss.syy, ss.sxy, ss.vx, ss.vy
	fn := float64(n)
	mx, my := s1/fn, s2/fn
	sxx, syy, sxy = sxx-s1*mx, syy-s2*my, sxy-s1*my
	lambda := math.Inf(1)
	if vx > 0 {
		lambda = vy / vx
	}
	b := sxy / sxx
	if sxy != 0 && lambda > 0 {
		b = demingSlope(sxx, syy, sxy, lambda)
	}
	if !allFinite(b) {
		b = sxy / sxx
	}
	st = yorkStartInfo{cx: x0 + mx, cy: y0 + my, b: b}
	st.ordinary = ordinaryScale(vx, sxx, fn) && ordinaryScale(vy, syy, fn)
	st.hard = vx > 0 && vy > 0 && (vx >= yorkHardRatio*sxx || vy >= yorkHardRatio*syy)
	st.kappa = 1
	if k := math.Sqrt(vy / vx); k > 0 && allFinite(k) {
		st.kappa = k
	}
	return st
}

// startSums are the sums of the start pass about (x0, y0).
type startSums struct{ s1, s2, sxx, syy, sxy, vx, vy float64 }

func (s startSums) plus(o startSums) startSums {
	return startSums{s.s1 + o.s1, s.s2 + o.s2, s.sxx + o.sxx, s.syy + o.syy, s.sxy + o.sxy, s.vx + o.vx, s.vy + o.vy}
}

func startAll(x, y, sx, sy []float64, x0, y0 float64) startSums {
	if len(x) < yorkParallelMinN {
		return startPart(x, y, sx, sy, x0, y0)
	}
	s, _ := chunkedSum(len(x), func(lo, hi int) (startSums, error) {
		return startPart(x[lo:hi], y[lo:hi], sx[lo:hi], sy[lo:hi], x0, y0), nil
	}, startSums.plus)
	return s
}

func startPart(x, y, sx, sy []float64, x0, y0 float64) (s startSums) {
	y, sx, sy = y[:len(x)], sx[:len(x)], sy[:len(x)]
	for i := range x {
		dx, dy := x[i]-x0, y[i]-y0
		s.s1 += dx
		s.s2 += dy
		s.sxx += dx * dx
		s.syy += dy * dy
		s.sxy += dx * dy
		s.vx += sx[i] * sx[i]
		s.vy += sy[i] * sy[i]
	}
	return s
}

// ordinaryScale says whether an axis with Σσ² = v and Σ(v − v̄)² = s has a
// mean square (of σ, or of the spread when every σ is zero) in [2⁻¹⁰⁰, 2¹⁰⁰].
func ordinaryScale(v, s, n float64) bool {
	q := v
	if q == 0 {
		q = s
	}
	q /= n
	return q >= 0x1p-100 && q <= 0x1p100
}

// rescale returns the data York works on: the data themselves when their
// scale is ordinary, else copies in yk's scratch multiplied by exact powers
// of two, kx for x and σx and ky for y and σy, chosen to bring each axis's
// largest σ (its largest deviation when every σ is zero) into [½, 1).
// Every product is exact, so the fit on the copies is the fit on the data
// with x′ = kx·x, y′ = ky·y: b = b′·kx/ky, a = a′/ky, S unchanged.
func (yk *york) rescale(x, y, sx, sy []float64) (xs, ys, sxs, sys []float64, st yorkStartInfo, kx, ky float64) {
	return yk.rescaleFrom(x, y, sx, sy, startAll(x, y, sx, sy, x[0], y[0]))
}

// rescaleFrom is rescale with the start pass's sums over the data given.
func (yk *york) rescaleFrom(x, y, sx, sy []float64, start startSums) (xs, ys, sxs, sys []float64, st yorkStartInfo, kx, ky float64) {
	st = startFrom(x[0], y[0], len(x), start)
	if st.ordinary {
		return x, y, sx, sy, st, 1, 1
	}
	n := len(x)
	if cap(yk.scaled) < 4*n {
		yk.scaled = make([]float64, 4*n)
	}
	buf := yk.scaled[:4*n]
	xs, ys, sxs, sys = buf[:n], buf[n:2*n], buf[2*n:3*n], buf[3*n:]
	kx, ky = pow2Scale(x, sx), pow2Scale(y, sy)
	for i := range n {
		xs[i], sxs[i] = x[i]*kx, sx[i]*kx
		ys[i], sys[i] = y[i]*ky, sy[i]*ky
	}
	return xs, ys, sxs, sys, yorkStart(xs, ys, sxs, sys), kx, ky
}

// pow2Scale returns the power of two that brings the largest σ of an axis
// (when every σ is zero, its largest deviation from the first value) into [½, 1).
func pow2Scale(v, s []float64) float64 {
	var m float64
	for _, e := range s {
		m = max(m, e)
	}
	if m == 0 {
		for _, e := range v {
			m = max(m, math.Abs(e-v[0]))
		}
	}
	_, e := math.Frexp(m)
	return math.Ldexp(1, -e)
}

// fitLine is York's line for the bootstrap: rescaled when the data need
// it, with the global search for hard data.
func (yk *york) fitLine(x, y, sx, sy, r []float64) (a, b float64, err error) {
	xs, ys, sxs, sys, st, kx, ky := yk.rescale(x, y, sx, sy)
	a, b, _, err = yk.slopeLine(xs, ys, sxs, sys, r, st)
	return a / ky, b * (kx / ky), err
}

// slopeLine returns only (a, b) and the iteration count, on data York may
// use as they are (rescaled when needed): the hot path of the jackknife
// and the bootstrap.
func (yk *york) slopeLine(x, y, sx, sy, r []float64, st yorkStartInfo) (a, b float64, iter int, err error) {
	ln, err := yk.solve(x, y, sx, sy, r, st)
	if err != nil {
		return 0, 0, ln.iter, err
	}
	return ln.cy - ln.b*ln.cx, ln.b, ln.iter, nil
}

// solve finds York's line: the iteration from the start, and for hard data
// (or when the iteration fails to converge) the global search over the
// slope angle.
func (yk *york) solve(x, y, sx, sy, r []float64, st yorkStartInfo) (yorkLine, error) {
	ln, err := yk.iterate(x, y, sx, sy, r, st.cx, st.cy, st.b)
	if err == nil && !st.hard {
		return ln, nil
	}
	if _, ok := err.(*PointError); ok {
		return ln, err
	}
	g, serr := yk.scan(x, y, sx, sy, r, st)
	if serr != nil {
		return ln, err
	}
	g.iter += ln.iter
	return g, nil
}

// iterate runs the York iteration from slope b with the points taken
// relative to (cx, cy), and returns the line with the weighted centroid of
// its last pass.
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
// York's map is g(b) = ΣWβV/ΣWβU = b + h(b)/ΣWβU with h = ΣWβ(V − bU)
// = −½·dS/db, so its fixed points are the stationary points of S, and a
// root of f = g − b is a minimum of S where f′·ΣWβU < 0. A secant step on
// f converges superlinearly, but to any root, maxima included: it is
// taken only when the secant's f′ has that sign (and it stays within the
// plain step's reach), else the plain step.
//
// The iteration stops when the relative slope change is at most Tol, or
// when it has reached the rounding floor of the data: the change is below
// 1e-12 and no longer shrinking, or the iterates cycle. Otherwise it stops
// at MaxIter with a *ConvergenceError.
func (yk *york) iterate(x, y, sx, sy, r []float64, cx, cy, b float64) (yorkLine, error) {
	if !allFinite(b) {
		return yorkLine{}, fmt.Errorf("%w: no starting slope (x is constant)", ErrDegenerate)
	}
	prev2 := math.NaN()
	var pb, pg float64 // the previous slope and its image g(pb)
	change, prevChange := math.Inf(1), math.Inf(1)
	minimum := 0
	for iter := 1; iter <= yk.maxIter; iter++ {
		var s yorkSums
		var err error
		if yk.skipping {
			ok := false
			if f := yk.first; f != nil && iter == 1 && cx == f.cx && cy == f.cy {
				s, ok = f.skipping(yk.skip, b)
			}
			if !ok {
				s, err = yk.passSkipping(x, y, sx, sy, r, cx, cy, b)
			}
		} else {
			s, err = yorkPassAll(x, y, sx, sy, r, cx, cy, b)
		}
		if err != nil {
			return yorkLine{iter: iter}, err
		}
		nb, dx, dy, den := s.step()
		if !allFinite(nb) {
			return yorkLine{iter: iter}, fmt.Errorf("%w: the York iteration left the finite range", ErrDegenerate)
		}
		cx, cy = cx+dx, cy+dy // the weighted centroid for slope b
		change = math.Abs(nb - b)
		if nb != 0 {
			change /= math.Abs(nb)
		}
		if change <= yk.tol || nb == prev2 || (change < 1e-12 && change >= prevChange) {
			return yorkLine{b: nb, cx: cx, cy: cy, iter: iter, minimum: minimum}, nil
		}
		next := nb
		if iter > 1 {
			f0, f1 := pg-pb, nb-b
			d := f1 - f0
			if math.Abs(b-pb) >= 1e-8*math.Abs(b) {
				// Steps this long measure f′ far above rounding.
				minimum = 0
				if s := d / (b - pb) * den; s < 0 {
					minimum = 1
				} else if s > 0 {
					minimum = -1
				}
			}
			if d != 0 && (d/(b-pb))*den < 0 {
				if sb := b - f1*(b-pb)/d; math.Abs(sb-nb) <= 2*math.Abs(nb-b) && allFinite(sb) {
					next = sb
				}
			}
		}
		pb, pg = b, nb
		prev2, b, prevChange = b, next, change
	}
	return yorkLine{iter: yk.maxIter}, &ConvergenceError{Method: MethodYork, Iterations: yk.maxIter, Change: change}
}

// yorkSums are the sums of one York pass (see iterate).
type yorkSums struct {
	w, wx, wy float64
	num, den  float64 // ΣW²(αX′Y′ + γY′²), ΣW²(αX′² + γX′Y′)
	a, aX, aY float64 // ΣW²α, ΣW²αX′, ΣW²αY′
	g, gX, gY float64 // ΣW²γ, ΣW²γX′, ΣW²γY′
}

// step is York's map from the sums of a pass about (cx, cy): the new
// slope ΣWβV/ΣWβU, the shift (dx, dy) of the weighted centroid and ΣWβU
// (see iterate).
func (s yorkSums) step() (nb, dx, dy, den float64) {
	dx, dy = s.wx/s.w, s.wy/s.w
	num := s.num - dy*s.aX - dx*s.aY + dx*dy*s.a - 2*dy*s.gY + dy*dy*s.g
	den = s.den - 2*dx*s.aX + dx*dx*s.a - dy*s.gX - dx*s.gY + dx*dy*s.g
	return num / den, dx, dy, den
}

// plus adds the sums of two parts of the data.
func (s yorkSums) plus(o yorkSums) yorkSums {
	return yorkSums{s.w + o.w, s.wx + o.wx, s.wy + o.wy, s.num + o.num, s.den + o.den,
		s.a + o.a, s.aX + o.aX, s.aY + o.aY, s.g + o.g, s.gX + o.gX, s.gY + o.gY}
}

// yorkPassAll is one pass over every point (chunked for large n).
func yorkPassAll(x, y, sx, sy, r []float64, cx, cy, b float64) (yorkSums, error) {
	if len(x) < yorkParallelMinN {
		if r == nil {
			return yorkPass(x, y, sx, sy, cx, cy, b)
		}
		return yorkPassR(x, y, sx, sy, r, cx, cy, b)
	}
	return chunkedSum(len(x), func(lo, hi int) (yorkSums, error) {
		if r == nil {
			return yorkPass(x[lo:hi], y[lo:hi], sx[lo:hi], sy[lo:hi], cx, cy, b)
		}
		return yorkPassR(x[lo:hi], y[lo:hi], sx[lo:hi], sy[lo:hi], r[lo:hi], cx, cy, b)
	}, yorkSums.plus)
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
		s.add(w, al, ga, xp, yp)
	}
	return s, nil
}

// add adds one point's terms: its weight w, α·W², γ·W² and its
// coordinates about the centroid.
func (s *yorkSums) add(w, al, ga, xp, yp float64) {
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
		s.add(w, al, ga, xp, yp)
	}
	return s, nil
}

// yorkScanMin and yorkScanMax bound the number of slope angles at which the
// global search evaluates S and dS/dφ. A local minimum is found when dS/dφ
// changes sign between neighbouring angles, so only a minimum with a
// maximum closer than the angle step beside it can be missed. The dips of
// S are as narrow as the thinnest error ellipse (in units where the
// typical error is round, see yorkStartInfo.kappa): a point's weight
// 1/(n·Σn) peaks over an angle of about its axis ratio q. The step is
// q_min/yorkScanPerQ, within these bounds; the property test of the global
// minimum checks it against a scan of 20,000 angles.
const (
	yorkScanMin  = 32
	yorkScanMax  = 1024
	yorkScanPerQ = 8
)

// scanAngles returns the number of angles for the global search: π over
// the step q_min/yorkScanPerQ, q the axis ratio √(λmin/λmax) of each point's
// error covariance with x in units of κ, [[κ²σx², κρ], [κρ, σy²]].
func scanAngles(sx, sy, r []float64, kappa float64) int {
	sy = sy[:len(sx)]
	qmin := 1.0
	k2 := kappa * kappa
	for i := range sx {
		a, c := k2*sx[i]*sx[i], sy[i]*sy[i]
		rr := rAt(r, i)
		lmax := (a+c)/2 + math.Hypot((a-c)/2, kappa*rr*sx[i]*sy[i])
		if q2 := a * c * (1 - rr*rr) / (lmax * lmax); q2 < qmin*qmin {
			qmin = math.Sqrt(q2)
		}
	}
	m := yorkScanPerQ * math.Pi / qmin
	if !(m < yorkScanMax) {
		return yorkScanMax
	}
	return max(yorkScanMin, int(math.Ceil(m)))
}

// scan is York's global search: S and dS/dφ over the slope angle
// φ ∈ (−π/2, π/2), b = κ·tan φ with κ = st.kappa (S is π-periodic in φ) at
// scanAngles angles; in every interval where dS/dφ goes from negative
// to positive a local minimum, located by regula falsi (Illinois) on dS/dφ
// and polished by York's iteration. It returns the lowest, and lists them
// all in yk.minima.
func (yk *york) scan(x, y, sx, sy, r []float64, st yorkStartInfo) (yorkLine, error) {
	cx, cy, kappa := st.cx, st.cy, st.kappa
	m := scanAngles(sx, sy, r, kappa)
	h := math.Pi / float64(m)
	if cap(yk.grid) < m {
		yk.grid = make([]float64, m)
	}
	ds := yk.grid[:m]
	for k := range ds {
		ds[k] = yk.profile(x, y, sx, sy, r, cx, cy, kappa, -math.Pi/2+(float64(k)+0.5)*h).ds
	}
	yk.minima = yk.minima[:0]
	best, bestS := yorkLine{}, math.Inf(1)
	iter := 0
	for k := range m {
		lo := -math.Pi/2 + (float64(k)+0.5)*h
		j := (k + 1) % m
		if !(ds[k] < 0 && ds[j] >= 0) {
			continue
		}
		phi, n := yk.rootAngle(x, y, sx, sy, r, cx, cy, kappa, lo, lo+h, ds[k], ds[j])
		iter += n
		ln, err := yk.iterate(x, y, sx, sy, r, cx, cy, kappa*math.Tan(phi))
		iter += ln.iter
		if err != nil || angleDist(math.Atan(ln.b/kappa), phi) > h {
			// York's iteration left the interval: keep the located minimum.
			p := yk.profile(x, y, sx, sy, r, cx, cy, kappa, phi)
			ln = yorkLine{b: kappa * math.Tan(phi), cx: cx + p.mx, cy: cy + p.my}
		}
		s := yk.profile(x, y, sx, sy, r, ln.cx, ln.cy, kappa, math.Atan(ln.b/kappa)).s
		if !allFinite(ln.b, s) {
			continue
		}
		yk.minima = append(yk.minima, yorkMin{b: ln.b, s: s})
		if s < bestS {
			best, bestS = ln, s
		}
	}
	if len(yk.minima) == 0 {
		return yorkLine{}, fmt.Errorf("%w: S has no finite minimum over the slope", ErrDegenerate)
	}
	best.iter, best.scanned = iter, true
	return best, nil
}

// angleDist is the distance of two slope angles modulo π.
func angleDist(a, b float64) float64 {
	return math.Abs(math.Remainder(a-b, math.Pi))
}

// rootAngle locates a zero of dS/dφ in [lo, hi], where it is fl < 0 at lo
// and fh ≥ 0 at hi, by regula falsi with the Illinois modification, to the
// resolution of the angle; it returns the angle and the passes it took.
func (yk *york) rootAngle(x, y, sx, sy, r []float64, cx, cy, kappa, lo, hi, fl, fh float64) (float64, int) {
	side := 0
	for it := 1; it <= 100; it++ {
		m := lo - fl*(hi-lo)/(fh-fl)
		if !(m > lo && m < hi) {
			m = lo + (hi-lo)/2
		}
		if !(m > lo && m < hi) {
			return m, it
		}
		fm := yk.profile(x, y, sx, sy, r, cx, cy, kappa, m).ds
		switch {
		case fm == 0:
			return m, it
		case fm < 0:
			lo, fl = m, fm
			if side < 0 {
				fh /= 2
			}
			side = -1
		case fm > 0:
			hi, fh = m, fm
			if side > 0 {
				fl /= 2
			}
			side = 1
		default: // not finite: bisect towards lo
			hi, fh = m, 1
		}
		if hi-lo <= 4*math.SmallestNonzeroFloat64+0x1p-52*math.Abs(hi) {
			return lo + (hi-lo)/2, it
		}
	}
	return lo + (hi-lo)/2, 100
}

// yorkProfile is S at one slope angle, its derivative in the angle, and
// the weighted centroid (mx, my) relative to the reference point.
type yorkProfile struct{ s, ds, mx, my float64 }

// profileSums are the sums of one profile pass (see profile).
type profileSums struct{ w, wx, wy, we, wee, a, b, c, d, e float64 }

func (p profileSums) plus(q profileSums) profileSums {
	return profileSums{p.w + q.w, p.wx + q.wx, p.wy + q.wy, p.we + q.we, p.wee + q.wee,
		p.a + q.a, p.b + q.b, p.c + q.c, p.d + q.d, p.e + q.e}
}

// profile evaluates S and dS/dφ at the slope b = κ·tan φ in one pass, with
// the points relative to (cx, cy). With the line's direction (c, s) =
// (cos φ, κ·sin φ), the residual e = c·y − s·x, its variance
// d = c²σy² + s²σx² − 2cs·ρ and W = 1/d (York's terms multiplied through by
// c², so that S is finite at vertical lines),
//
//	S = ΣWe² − (ΣWe)²/ΣW = min over k of ΣW(e − k)²
//	dS/dφ = Σ[−d′W²(e − k)² + 2W(e − k)e′],  k = ΣWe/ΣW
//
// (the envelope theorem), with c′ = −sin φ, s′ = κ·cos φ, e′ = c′y − s′x,
// d′ = 2cc′σy² + 2ss′σx² − 2(c′s + cs′)ρ. A point with d ≤ 0 (a vertical
// line through a point with σx = 0) makes S infinite there.
func (yk *york) profile(x, y, sx, sy, r []float64, cx, cy, kappa, phi float64) yorkProfile {
	sn, cs := math.Sincos(phi)
	dir := yorkDir{c: cs, s: kappa * sn, dc: -sn, ds: kappa * cs}
	var p profileSums
	if yk.skipping {
		k := yk.skip
		p = profilePart(x[:k], y[:k], sx[:k], sy[:k], rPart(r, 0, k), cx, cy, dir).
			plus(profilePart(x[k+1:], y[k+1:], sx[k+1:], sy[k+1:], rPart(r, k+1, len(x)), cx, cy, dir))
	} else {
		p = profileAll(x, y, sx, sy, r, cx, cy, dir)
	}
	if !(p.w > 0) || math.IsInf(p.w, 0) {
		return yorkProfile{s: math.Inf(1), ds: math.NaN()}
	}
	k := p.we / p.w
	return yorkProfile{
		s:  p.wee - k*p.we,
		ds: -(p.a - 2*k*p.b + k*k*p.c) + 2*(p.d-k*p.e),
		mx: p.wx / p.w, my: p.wy / p.w,
	}
}

// yorkDir is a line direction (c, s) and its derivative in the scan angle.
type yorkDir struct{ c, s, dc, ds float64 }

func rPart(r []float64, lo, hi int) []float64 {
	if r == nil {
		return nil
	}
	return r[lo:hi]
}

func profileAll(x, y, sx, sy, r []float64, cx, cy float64, dir yorkDir) profileSums {
	if len(x) < yorkParallelMinN {
		return profilePart(x, y, sx, sy, r, cx, cy, dir)
	}
	p, _ := chunkedSum(len(x), func(lo, hi int) (profileSums, error) {
		return profilePart(x[lo:hi], y[lo:hi], sx[lo:hi], sy[lo:hi], rPart(r, lo, hi), cx, cy, dir), nil
	}, profileSums.plus)
	return p
}

func profilePart(x, y, sx, sy, r []float64, cx, cy float64, dir yorkDir) (p profileSums) {
	y, sx, sy = y[:len(x)], sx[:len(x)], sy[:len(x)]
	c, s, dc, ds := dir.c, dir.s, dir.dc, dir.ds
	for i := range x {
		vx, vy := sx[i]*sx[i], sy[i]*sy[i]
		d := c*c*vy + s*s*vx
		dd := 2 * (c*dc*vy + s*ds*vx)
		if r != nil {
			rho := r[i] * sx[i] * sy[i]
			d -= 2 * c * s * rho
			dd -= 2 * (dc*s + c*ds) * rho
		}
		if !(d > 0) {
			return profileSums{w: math.Inf(1)}
		}
		w := 1 / d
		xp, yp := x[i]-cx, y[i]-cy
		e := c*yp - s*xp
		de := dc*yp - ds*xp
		we := w * e
		dw2 := dd * w * w
		p.w += w
		p.wx += w * xp
		p.wy += w * yp
		p.we += we
		p.wee += we * e
		p.a += dw2 * e * e
		p.b += dw2 * e
		p.c += dw2
		p.d += we * de
		p.e += w * de
	}
	return p
}

// closing evaluates at York's slope, in one pass, the standard errors and
// S. Relative to the converged centroid c (U = X − c_x, V = Y − c_y, with
// weighted means δu, δv that are zero up to rounding):
//
//	S = ΣW(V − bU)² − ΣW·(δv − b·δu)²
//	Σ W(x_adj − x̄_adj)² = ΣWβ² − (ΣWβ)²/ΣW,  x̄_adj = c_x + δu + ΣWβ/ΣW
func closing(x, y, sx, sy, r []float64, ln yorkLine) yorkResult {
	b, cx, cy := ln.b, ln.cx, ln.cy
	cs := lineSums(x, y, sx, sy, r, b, cx, cy, closingPart, closingSums.plus)
	sw, su, sv, sb, sbb, sr := cs.sw, cs.su, cs.sv, cs.sb, cs.sbb, cs.sr
	du, dv := su/sw, sv/sw
	mx, my := cx+du, cy+dv
	s := sr - sw*(dv-b*du)*(dv-b*du)
	xbar := mx + sb/sw
	swuu := sbb - sb*sb/sw
	varB := 1 / swuu
	varA := 1/sw + xbar*xbar*varB
	return yorkResult{a: my - b*mx, b: b, seA: math.Sqrt(varA), seB: math.Sqrt(varB),
		cov: -xbar * varB, s: math.Max(s, 0), xbar: xbar, ycentre: my + b*(xbar-mx), seCentre: math.Sqrt(1 / sw)}
}

// closingWeight is point i's variances, error covariance ρσxσy (0 when r
// is nil) and York weight W = 1/(σy² + b²σx² − 2bρσxσy) at slope b, as the
// closing and curvature passes take them (the iteration's passes keep
// their own forms, with b² hoisted, which round differently).
func closingWeight(sx, sy, r []float64, i int, b float64) (vx, vy, rho, w float64) {
	vx, vy = sx[i]*sx[i], sy[i]*sy[i]
	if r != nil {
		rho = r[i] * sx[i] * sy[i]
	}
	return vx, vy, rho, 1 / (vy + b*b*vx - 2*b*rho)
}

// closingSums are the sums of the closing pass.
type closingSums struct{ sw, su, sv, sb, sbb, sr float64 }

func (s closingSums) plus(o closingSums) closingSums {
	return closingSums{s.sw + o.sw, s.su + o.su, s.sv + o.sv, s.sb + o.sb, s.sbb + o.sbb, s.sr + o.sr}
}

func closingPart(x, y, sx, sy, r []float64, b, cx, cy float64) closingSums {
	y, sx, sy = y[:len(x)], sx[:len(x)], sy[:len(x)]
	var sw, su, sv, sb, sbb, sr float64
	for i := range x {
		vx, vy, rho, w := closingWeight(sx, sy, r, i, b)
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
	return closingSums{sw, su, sv, sb, sbb, sr}
}

// curvature is d²S/db² at York's slope, from one pass: the Schur
// complement of the Hessian of ΣW(Y − a − bX)² in (a, b), with W′ = −2W²γ
// and W″ = 8W³γ² − 2W²σx², γ = b·σx² − ρ,
//
//	d²S/db² = Σ(8W³γ² − 2W²σx²)e² + 8ΣW²γeU + 2ΣWU² − 8(ΣW²γe)²/ΣW
//
// with U = X − X̄, e = V − bU relative to the weighted centroid (taken as
// (cx, cy), York's last pass's, whose remaining shift is negligible for a sign).
func curvature(x, y, sx, sy, r []float64, ln yorkLine) float64 {
	b, cx, cy := ln.b, ln.cx, ln.cy
	c := lineSums(x, y, sx, sy, r, b, cx, cy, curvaturePart, curvatureSums.plus)
	return c.c2 + 8*c.cu + 2*(c.suu-c.su*c.su/c.sw) - 8*c.ce*c.ce/c.sw
}

// curvatureSums are the sums of the curvature pass.
type curvatureSums struct{ sw, su, suu, c2, cu, ce float64 }

func (s curvatureSums) plus(o curvatureSums) curvatureSums {
	return curvatureSums{s.sw + o.sw, s.su + o.su, s.suu + o.suu, s.c2 + o.c2, s.cu + o.cu, s.ce + o.ce}
}

func curvaturePart(x, y, sx, sy, r []float64, b, cx, cy float64) curvatureSums {
	y, sx, sy = y[:len(x)], sx[:len(x)], sy[:len(x)]
	var sw, su, suu, c2, cu, ce float64
	for i := range x {
		vx, _, rho, w := closingWeight(sx, sy, r, i, b)
		u := x[i] - cx
		e := y[i] - cy - b*u
		gam := b*vx - rho
		g := w * w * gam
		sw += w
		su += w * u
		suu += w * u * u
		c2 += (8*w*g*gam - 2*w*w*vx) * e * e
		cu += g * e * u
		ce += g * e
	}
	return curvatureSums{sw, su, suu, c2, cu, ce}
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

// jackknife refits York without each point in turn, warm-started at the
// full fit's centroid and, on ordinary data, at the slope jackStarts
// predicts for each refit (else at the full fit's slope b), on the data
// York fitted, rescaled or not; hard data get the global search in every
// refit.
//
// The leave-one-out fits stop at a relative slope change of 1e-12: the
// jackknife's spread is of the order of the SE, many orders above that.
func (yk *york) jackknife(x, y, sx, sy, r []float64, b float64, st0 yorkStartInfo) (as, bs []float64, err error) {
	jk := &york{tol: max(yk.tol, 1e-12), maxIter: yk.maxIter, skipping: true}
	n := len(x)
	as = make([]float64, n)
	bs = make([]float64, n)
	st := yorkStartInfo{cx: yk.cx, cy: yk.cy, b: b, hard: st0.hard, kappa: st0.kappa}
	// Ordinary data: each refit starts at its slope predicted from the
	// full data's sums (bs holds the starts until it is overwritten).
	predicted := false
	if !st0.hard {
		jk.first = newJackFirst(x, y, sx, sy, r, yk.cx, yk.cy)
		predicted = jackStarts(x, y, sx, sy, r, jk.first, b, bs)
	}
	for i := range n {
		jk.skip = i
		if predicted {
			st.b = bs[i]
		}
		ai, bi, _, err := jk.slopeLine(x, y, sx, sy, r, st)
		if err != nil {
			return nil, nil, fmt.Errorf("eiv: york jackknife without point %d: %w", i+1, err)
		}
		as[i], bs[i] = ai, bi
	}
	return as, bs, nil
}

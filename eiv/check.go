package eiv

import "math"

// checkXY validates the paired values shared by every estimator.
func checkXY(x, y []float64) error {
	if len(x) != len(y) {
		return ErrLengthMismatch
	}
	if len(x) < 3 {
		return ErrTooFewPoints
	}
	return scanXY(x, y, x[0]).verdict()
}

// xyScan is what checkXY's pass learns: the first non-finite value (err,
// its index relative to the part scanned), the largest magnitudes, and
// whether every x equals x0.
type xyScan struct {
	mx, my   float64
	constant bool
	err      error
}

// scanXY is checkXY's pass over (part of) the data.
func scanXY(x, y []float64, x0 float64) xyScan {
	// One pass: v − v is 0 exactly for finite v and NaN for ±Inf and NaN.
	y = y[:len(x)]
	sc := xyScan{constant: true}
	for i := range x {
		xi, yi := x[i], y[i]
		if !(xi-xi == 0 && yi-yi == 0) {
			if !allFinite(xi) {
				return xyScan{err: &PointError{Index: i, Field: "x", Err: ErrNonFinite}}
			}
			return xyScan{err: &PointError{Index: i, Field: "y", Err: ErrNonFinite}}
		}
		if a := math.Abs(xi); a > sc.mx {
			sc.mx = a
		}
		if a := math.Abs(yi); a > sc.my {
			sc.my = a
		}
		if xi != x0 {
			sc.constant = false
		}
	}
	return sc
}

// verdict is checkXY's answer from the pass over all the data.
func (sc xyScan) verdict() error {
	switch {
	case sc.err != nil:
		return sc.err
	case outOfRange(sc.mx) || outOfRange(sc.my):
		return ErrMagnitude
	case sc.constant:
		return ErrConstantX
	}
	return nil
}

// outOfRange says whether a column with largest magnitude m has squares
// that leave double precision.
func outOfRange(m float64) bool { return m > 1e150 || (m > 0 && m < 1e-150) }

// checkSigma validates one column of standard uncertainties: finite and ≥ 0.
func checkSigma(s []float64, n int, field string) error {
	if s == nil {
		return nil
	}
	if len(s) != n {
		return ErrLengthMismatch
	}
	for i, v := range s {
		if !(v-v == 0) || v < 0 {
			if !allFinite(v) {
				return &PointError{Index: i, Field: field, Err: ErrNonFinite}
			}
			return &PointError{Index: i, Field: field, Err: ErrInvalidUncertainty}
		}
	}
	return nil
}

// checkCorrelation validates error correlations: finite and in (−1, 1).
func checkCorrelation(r []float64, n int) error {
	if r == nil {
		return nil
	}
	if len(r) != n {
		return ErrLengthMismatch
	}
	for i, v := range r {
		if !allFinite(v) {
			return &PointError{Index: i, Field: "r", Err: ErrNonFinite}
		}
		if !(v > -1 && v < 1) {
			return &PointError{Index: i, Field: "r", Err: ErrInvalidCorrelation}
		}
	}
	return nil
}

// moments are centred first and second moments of a bivariate sample,
// computed in two passes so that a large common offset costs no precision.
type moments struct {
	n        float64
	mx, my   float64 // means
	lx, ly   float64 // the parts of the means that mx and my cannot hold (x̄ = mx + lx)
	sxx, syy float64 // Σ(x−x̄)², Σ(y−ȳ)²
	sxy      float64 // Σ(x−x̄)(y−ȳ)
	// Sums of the residuals r about a pilot slope (checkedMoments only):
	// S_rr = Σ(r−r̄)², S_rx = Σ(r−r̄)(x−x̄), with hasPilot set.
	pilot, srr, srx float64
	srrErr, srxErr  float64 // bounds on the rounding errors of S_rr and S_rx
	hasPilot        bool
	centred         bool // recomputed in two passes about the means
}

// checkedMoments validates (x, y) as checkXY does and returns their
// moments, in one pass over the data for the usual case: the hot path of
// Deming. A non-zero Scale (and no moments) says that the values lie
// outside the band where squares and products of sums are safe: the caller
// rescales the data by it and calls again.
//
// The same pass sums the residuals r = dy − b₀·dx about a pilot slope b₀
// (the Deming slope of the first few points, λ as given), so that the
// residual sum of squares of the final slope b follows without the
// cancellation of s_yy − 2b·s_xy + b²·s_xx (see ssr).
func checkedMoments(x, y []float64, lambda float64) (moments, Scale, error) {
	if len(x) != len(y) {
		return moments{}, Scale{}, ErrLengthMismatch
	}
	n := len(x)
	if n < 3 {
		return moments{}, Scale{}, ErrTooFewPoints
	}
	y = y[:n]
	x0, y0 := x[0], y[0]
	if !(x0-x0 == 0 && y0-y0 == 0) {
		return moments{}, Scale{}, checkXY(x, y)
	}
	// NaN or ±Inf anywhere makes the sums non-finite, and constant x makes
	// sxx zero: both send the rare bad case to checkXY for its precise error.
	// Six running sums and nothing else, so that they stay in registers.
	b0 := pilotSlope(x, y, x0, y0, lambda)
	var s1, s2, sxx, syy, sxy, srr float64
	for i := range n {
		dx, dy := x[i]-x0, y[i]-y0
		s1 += dx
		s2 += dy
		sxx += dx * dx
		syy += dy * dy
		sxy += dx * dy
		r := dy - b0*dx
		srr += r * r
	}
	fn := float64(n)
	// The magnitudes from the sums: max|x| lies between
	// max(|x₀|, √(Σdx²/n)/2) and |x₀| + √Σdx². Only when that does not
	// settle the band is the largest value looked up.
	inside := func(v0, ss float64) bool {
		return math.Max(math.Abs(v0), math.Sqrt(ss/fn)/2) >= 0x1p-100 && math.Abs(v0)+math.Sqrt(ss) <= 0x1p100
	}
	if !(allFinite(s1, s2, sxx, syy, sxy, srr) && sxx > 0) || !inside(x0, sxx) || !inside(y0, syy) {
		if err := checkXY(x, y); err != nil {
			return moments{}, Scale{}, err
		}
		if !inBand(maxAbs(x)) || !inBand(maxAbs(y)) {
			return moments{}, Scale{X: magnitude(x), Y: magnitude(y)}, nil
		}
		return centredMoments(x, y), Scale{}, nil
	}
	m := shiftedResult(x, y, x0, y0, s1, s2, sxx, syy, sxy)
	if !m.centred {
		// S_rr = Σ(r − r̄)² with r̄ = ȳ′ − b₀·x̄′, and S_rx = Σ(r − r̄)(dx − d̄x)
		// from the moments.
		rs := s2 - b0*s1
		m.pilot, m.hasPilot = b0, true
		m.srr = math.Max(0, srr-rs*rs/fn)
		m.srx = m.sxy - b0*m.sxx
		// Each r is rounded by about ε·(|dy| + |b₀·dx|), so Σr² is off by at
		// most 2ε·√Σr²·√(2(Σdy² + b₀²·Σdx²)) (Cauchy–Schwarz); S_rx by about
		// 2ε·(|Σdxdy| + |b₀|·Σdx²).
		m.srrErr = 2 * 0x1p-53 * math.Sqrt(srr) * math.Sqrt(2*(syy+b0*b0*sxx))
		m.srxErr = 2 * 0x1p-53 * (math.Abs(sxy) + math.Abs(b0)*sxx)
	}
	return m, Scale{}, nil
}

// pilotSlope is the Deming slope (λ = +Inf: OLS) of the first points,
// shifted by (x0, y0); 0 when they do not determine one.
func pilotSlope(x, y []float64, x0, y0, lambda float64) float64 {
	var sx, sy, sxx, syy, sxy float64
	k := min(len(x), 16)
	for i := range k {
		dx, dy := x[i]-x0, y[i]-y0
		sx += dx
		sy += dy
		sxx += dx * dx
		syy += dy * dy
		sxy += dx * dy
	}
	fk := float64(k)
	sxx -= sx * sx / fk
	syy -= sy * sy / fk
	sxy -= sx * sy / fk
	if !(sxx > 0) || sxy == 0 {
		return 0
	}
	b := demingSlope(sxx, syy, sxy, lambda)
	if !allFinite(b) {
		return 0
	}
	return b
}

// ssr returns the residual sum of squares Σ(e − ē)² of the line through
// the means with slope b. From the pilot sums it is
//
//	S_rr − 2δ·S_rx + δ²·s_xx,  δ = b − b₀
//
// whose terms are all of the size of the result when b₀ is near b; when
// they cancel (by more than a factor 64, so the result would keep less
// than the moments' own accuracy), when the rounding of the residuals
// about the pilot line could exceed 2^-40 of the result (a point far from
// the first row), or when there is no pilot, the residuals are summed in a
// second pass about the means (residualSS).
func (m moments) ssr(x, y []float64, b float64) float64 {
	if m.hasPilot {
		d := b - m.pilot
		t1, t2, t3 := m.srr, 2*d*m.srx, d*d*m.sxx
		err := m.srrErr + 2*math.Abs(d)*m.srxErr
		if v := t1 - t2 + t3; v > 0 && math.Abs(t1)+math.Abs(t2)+math.Abs(t3) <= 64*v && err <= 0x1p-40*v {
			return v
		}
	}
	return residualSS(x, y, m, b)
}

// shiftedResult turns sums of the values less (x0, y0) into moments. Their
// rounding error relative to s_xx is about ε·(1 + n(x̄ − x₀)²/s_xx): a few
// ulps while (x₀, y₀) lies within two standard deviations of the mean, and
// up to n× more when it is far from the rest (a high standard first in the
// file). Then the moments are recomputed about the mean in two passes, so
// that no result depends on the order of the rows beyond rounding.
func shiftedResult(x, y []float64, x0, y0, sx, sy, sxx, syy, sxy float64) moments {
	m, far := shiftedSums(len(x), x0, y0, sx, sy, sxx, syy, sxy)
	if far {
		m = centredMoments(x, y)
		m.centred = true
	}
	return m
}

// shiftedSums is shiftedResult's arithmetic on the sums of n points; far
// reports that (x0, y0) lies too far from the rest for the moments to be
// kept, so that they must be recomputed about the mean.
func shiftedSums(n int, x0, y0, sx, sy, sxx, syy, sxy float64) (m moments, far bool) {
	fn := float64(n)
	ax, ay := sx/fn, sy/fn
	cx, cy := sx*ax, sy*ay // n·(x̄ − x₀)², the part the shift removes
	m = moments{n: fn, sxx: math.Max(0, sxx-cx), syy: math.Max(0, syy-cy), sxy: sxy - sx*ay}
	m.mx, m.lx = twoSum(x0, ax)
	m.my, m.ly = twoSum(y0, ay)
	return m, cx > 4*m.sxx || cy > 4*m.syy
}

// shiftedMoments computes the same moments in one pass, from sums of the
// values less the first point, and like checkedMoments in two passes when
// that point lies far from the rest.
func shiftedMoments(x, y []float64) moments {
	n := len(x)
	y = y[:n]
	x0, y0 := x[0], y[0]
	var sx, sy, sxx, syy, sxy float64
	for i := range n {
		dx, dy := x[i]-x0, y[i]-y0
		sx += dx
		sy += dy
		sxx += dx * dx
		syy += dy * dy
		sxy += dx * dy
	}
	return shiftedResult(x, y, x0, y0, sx, sy, sxx, syy, sxy)
}

// twoSum returns s = fl(a + b) and the rounding error a + b − s, exactly
// (Knuth's TwoSum).
func twoSum(a, b float64) (s, e float64) {
	s = a + b
	bb := s - a
	return s, (a - (s - bb)) + (b - bb)
}

// dev returns v − (m + l): the deviation from a mean held in two parts,
// which keeps its digits when the mean is far from 0 (v ~ 1e9, spread 1).
func dev(v, m, l float64) float64 { return (v - m) - l }

// residualSS returns Σ(e − ē)² of the residuals e = (y − ȳ) − b·(x − x̄)
// about the centred data: a second pass that keeps its digits however close
// the points lie to the line, where s_yy − 2b·s_xy + b²·s_xx from the
// moments has a relative error of about ε/(1 − R²).
func residualSS(x, y []float64, m moments, b float64) float64 {
	n := len(x)
	y = y[:n]
	mx, my, lx, ly := m.mx, m.my, m.lx, m.ly
	// Four independent accumulators: no chain of dependent additions (and
	// a smaller rounding error than one running sum).
	var s0, s1, s2, s3, q0, q1, q2, q3 float64
	i := 0
	for ; i+4 <= n; i += 4 {
		e0 := ((y[i] - my) - ly) - b*((x[i]-mx)-lx)
		e1 := ((y[i+1] - my) - ly) - b*((x[i+1]-mx)-lx)
		e2 := ((y[i+2] - my) - ly) - b*((x[i+2]-mx)-lx)
		e3 := ((y[i+3] - my) - ly) - b*((x[i+3]-mx)-lx)
		s0, s1, s2, s3 = s0+e0, s1+e1, s2+e2, s3+e3
		q0, q1, q2, q3 = q0+e0*e0, q1+e1*e1, q2+e2*e2, q3+e3*e3
	}
	for ; i < n; i++ {
		e := ((y[i] - my) - ly) - b*((x[i]-mx)-lx)
		s0 += e
		q0 += e * e
	}
	se, see := (s0+s1)+(s2+s3), (q0+q1)+(q2+q3)
	return math.Max(0, see-se*se/m.n)
}

func centredMoments(x, y []float64) moments {
	n := len(x)
	var sx, sy float64
	for i := range n {
		sx += x[i]
		sy += y[i]
	}
	m := moments{n: float64(n), mx: sx / float64(n), my: sy / float64(n)}
	// Second pass: centred sums, with the first-order correction of the mean
	// (the "corrected two-pass" algorithm of Chan, Golub & LeVeque 1983).
	var cx, cy, xx, yy, xy float64
	for i := range n {
		dx := x[i] - m.mx
		dy := y[i] - m.my
		cx += dx
		cy += dy
		xx += dx * dx
		yy += dy * dy
		xy += dx * dy
	}
	m.mx, m.lx = twoSum(m.mx, cx/m.n)
	m.my, m.ly = twoSum(m.my, cy/m.n)
	m.sxx = xx - cx*cx/m.n
	m.syy = yy - cy*cy/m.n
	m.sxy = xy - cx*cy/m.n
	return m
}

// demingSlope returns the Deming slope for error-variance ratio lambda
// (var(y error)/var(x error)) from centred sums, choosing the root formula
// that avoids cancellation. lambda = +Inf gives the OLS slope and lambda = 0
// the inverse regression s_yy/s_xy. Every λ in [0, +Inf] is handled: when
// λ·s_xx or 4λ·s_xy² would leave double precision the formula is evaluated
// on the moments divided by s_xx.
func demingSlope(sxx, syy, sxy, lambda float64) float64 {
	if math.IsInf(lambda, 1) {
		return sxy / sxx
	}
	d := syy - lambda*sxx
	var root float64
	if e := 4 * lambda * sxy * sxy; math.Abs(d) < 1e150 && e < 1e300 {
		root = math.Sqrt(d*d + e) // no overflow: the fast path
	} else {
		// b depends on the moments through their ratios only; for a large
		// λ the formula is divided by λ as well.
		r, c := syy/sxx, sxy/sxx
		if lambda > 1 {
			u := r/lambda - 1
			root = math.Hypot(u, 2*c/math.Sqrt(lambda))
			if u >= 0 {
				return lambda * (u + root) / (2 * c)
			}
			return 2 * c / (root - u)
		}
		d = r - lambda
		root = math.Hypot(d, 2*math.Sqrt(lambda)*c)
		sxy = c
	}
	if d >= 0 {
		return (d + root) / (2 * sxy)
	}
	return 2 * lambda * sxy / (root - d)
}

// demingStep returns δ = b_(i) − b, the change of the Deming slope b of
// moments m when the point with centred coordinates (dx, dy) and weight
// factor k (n/(n−1) unweighted; w_i·Σw/(Σw − w_i) weighted) is removed,
// without the cancellation of b_(i) − b for points that move the line
// little. With the downdated moments S_(i), the slope's quadratic
//
//	F(β) = s_xy·β² + (λ·s_xx − s_yy)·β − λ·s_xy
//
// has at the full-sample b the value F_(i)(b) = k·e·(b·dy + λ·dx), with
// e = dy − b·dx the point's residual, so δ is the root of
// F_(i)(b) + F′_(i)(b)·δ + s_xy,(i)·δ² = 0 nearest to 0, taken by the
// stable quadratic formula. For OLS (λ = +Inf) it is −k·dx·e/s_xx,(i).
// ok is false when the downdated moments have lost more than about four
// digits to cancellation (a point that dominates the spread): the caller
// then refits without the point.
func demingStep(m moments, dx, dy, k, lambda, b float64) (sxx, syy, sxy, delta float64, ok bool) {
	kxx, kyy := k*dx*dx, k*dy*dy
	sxx, syy, sxy = m.sxx-kxx, m.syy-kyy, m.sxy-k*dx*dy
	// The downdate's rounding error is about ε·(s_xx + k·dx²); at most
	// one or two points can make that large against the remainder.
	const lost = 1e4
	if !(sxx*lost > m.sxx+kxx) || !(syy*lost > m.syy+kyy || (m.syy == 0 && kyy == 0)) {
		return sxx, syy, sxy, 0, false
	}
	e := dy - b*dx
	if math.IsInf(lambda, 1) {
		return sxx, syy, sxy, -k * dx * e / sxx, true
	}
	f0 := k * e * (b*dy + lambda*dx)
	f1 := 2*sxy*b + lambda*sxx - syy
	disc := f1*f1 - 4*sxy*f0
	direct := demingSlope(sxx, syy, sxy, lambda) - b
	if !(disc >= 0) || !allFinite(f0, f1, disc) || math.Abs(direct) > math.Abs(b)/2 {
		return sxx, syy, sxy, direct, true
	}
	q := f1 + math.Copysign(math.Sqrt(disc), f1)
	if q == 0 {
		return sxx, syy, sxy, direct, true
	}
	return sxx, syy, sxy, -2 * f0 / q, true
}

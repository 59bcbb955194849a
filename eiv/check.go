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
	// One pass: v − v is 0 exactly for finite v and NaN for ±Inf and NaN.
	y = y[:len(x)]
	var mx, my float64
	x0, constant := x[0], true
	for i := range x {
		xi, yi := x[i], y[i]
		if !(xi-xi == 0 && yi-yi == 0) {
			if !allFinite(xi) {
				return &PointError{Index: i, Field: "x", Err: ErrNonFinite}
			}
			return &PointError{Index: i, Field: "y", Err: ErrNonFinite}
		}
		if a := math.Abs(xi); a > mx {
			mx = a
		}
		if a := math.Abs(yi); a > my {
			my = a
		}
		if xi != x0 {
			constant = false
		}
	}
	if outOfRange(mx) || outOfRange(my) {
		return ErrMagnitude
	}
	if constant {
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
	sxx, syy float64 // Σ(x−x̄)², Σ(y−ȳ)²
	sxy      float64 // Σ(x−x̄)(y−ȳ)
}

// checkedMoments validates (x, y) as checkXY does and returns their
// moments, in one pass over the data: the hot path of Deming and OLS.
func checkedMoments(x, y []float64) (moments, error) {
	if len(x) != len(y) {
		return moments{}, ErrLengthMismatch
	}
	n := len(x)
	if n < 3 {
		return moments{}, ErrTooFewPoints
	}
	y = y[:n]
	x0, y0 := x[0], y[0]
	if !(x0-x0 == 0 && y0-y0 == 0) {
		return moments{}, checkXY(x, y)
	}
	// NaN or ±Inf anywhere makes the sums non-finite, and constant x makes
	// sxx zero: both send the rare bad case to checkXY for its precise error.
	var s1, s2, sxx, syy, sxy float64
	xlo, xhi, ylo, yhi := x0, x0, y0, y0
	for i := range n {
		xi, yi := x[i], y[i]
		// Range by comparisons: predictable branches, cheaper than |v| and max.
		if xi > xhi {
			xhi = xi
		} else if xi < xlo {
			xlo = xi
		}
		if yi > yhi {
			yhi = yi
		} else if yi < ylo {
			ylo = yi
		}
		dx, dy := xi-x0, yi-y0
		s1 += dx
		s2 += dy
		sxx += dx * dx
		syy += dy * dy
		sxy += dx * dy
	}
	mx := math.Max(math.Abs(xlo), math.Abs(xhi))
	my := math.Max(math.Abs(ylo), math.Abs(yhi))
	if !(allFinite(s1, s2, sxx, syy, sxy, mx, my) && sxx > 0) || outOfRange(mx) || outOfRange(my) {
		return moments{}, checkXY(x, y)
	}
	fn := float64(n)
	ax, ay := s1/fn, s2/fn
	return moments{n: fn, mx: x0 + ax, my: y0 + ay,
		sxx: math.Max(0, sxx-s1*ax), syy: math.Max(0, syy-s2*ay), sxy: sxy - s1*ay}, nil
}

// shiftedMoments computes the same moments in one pass, from sums of the
// values less the first point (a shift that leaves the sums small unless
// the first point lies far outside the rest; the relative error of s_xx is
// then about ε·(1 + n(x̄ − x₀)²/s_xx)).
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
	fn := float64(n)
	mx, my := sx/fn, sy/fn
	return moments{n: fn, mx: x0 + mx, my: y0 + my,
		sxx: math.Max(0, sxx-sx*mx), syy: math.Max(0, syy-sy*my), sxy: sxy - sx*my}
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
	m.mx += cx / m.n
	m.my += cy / m.n
	m.sxx = xx - cx*cx/m.n
	m.syy = yy - cy*cy/m.n
	m.sxy = xy - cx*cy/m.n
	return m
}

// demingSlope returns the Deming slope for error-variance ratio lambda
// (var(y error)/var(x error)) from centred sums, choosing the root formula
// that avoids cancellation. lambda = +Inf gives the OLS slope.
func demingSlope(sxx, syy, sxy, lambda float64) float64 {
	if math.IsInf(lambda, 1) {
		return sxy / sxx
	}
	d := syy - lambda*sxx
	var root float64
	if e := 4 * lambda * sxy * sxy; math.Abs(d) < 1e150 && e < 1e300 {
		root = math.Sqrt(d*d + e) // no overflow: the fast path
	} else {
		root = math.Hypot(d, 2*math.Sqrt(lambda)*sxy)
	}
	if d >= 0 {
		return (d + root) / (2 * sxy)
	}
	return 2 * lambda * sxy / (root - d)
}

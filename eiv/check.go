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
	for i := range x {
		if !allFinite(x[i]) {
			return &PointError{Index: i, Field: "x", Err: ErrNonFinite}
		}
		if !allFinite(y[i]) {
			return &PointError{Index: i, Field: "y", Err: ErrNonFinite}
		}
	}
	if err := checkMagnitude(x); err != nil {
		return err
	}
	if err := checkMagnitude(y); err != nil {
		return err
	}
	x0 := x[0]
	for _, v := range x[1:] {
		if v != x0 {
			return nil
		}
	}
	return ErrConstantX
}

// checkMagnitude refuses a column whose squares would overflow or underflow.
func checkMagnitude(v []float64) error {
	var m float64
	for _, f := range v {
		m = math.Max(m, math.Abs(f))
	}
	if m > 1e150 || (m > 0 && m < 1e-150) {
		return ErrMagnitude
	}
	return nil
}

// checkSigma validates one column of standard uncertainties: finite and ≥ 0.
func checkSigma(s []float64, n int, field string) error {
	if s == nil {
		return nil
	}
	if len(s) != n {
		return ErrLengthMismatch
	}
	for i, v := range s {
		if !allFinite(v) {
			return &PointError{Index: i, Field: field, Err: ErrNonFinite}
		}
		if v < 0 {
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
	root := math.Hypot(d, 2*math.Sqrt(lambda)*sxy)
	if d >= 0 {
		return (d + root) / (2 * sxy)
	}
	return 2 * lambda * sxy / (root - d)
}

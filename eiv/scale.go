package eiv

import "math"

// Scale is a change of units by powers of two, x = 2^X·x′ and y = 2^Y·y′.
// Multiplying by a power of two is exact in binary floating point (unless
// a value falls below the normal range, where it is negligible next to the
// column's largest value), so an estimator that fits the rescaled data and
// transforms the result back with Unscale gives the line of the original
// data without the over- and underflow of squares and products of moments
// (|v| up to 1e150 has squares of 1e300, and products of two such sums
// leave double precision).
//
// The zero Scale is the identity.
type Scale struct{ X, Y int }

// safeExp bounds the exponents (of the largest magnitude in a column) for
// which the estimators work on the data as they are: squares, sums of n
// squares and products of two such sums stay normal for |v| in
// [2^-safeExp, 2^safeExp]. Inside the band rescaling would change nothing
// (powers of two commute exactly with every operation), so it is skipped.
const safeExp = 100

// magnitude returns the binary exponent e of the largest |v| in the
// columns (|v| in [2^(e−1), 2^e)); 0 for columns that are all zero.
func magnitude(cols ...[]float64) int {
	var m float64
	for _, c := range cols {
		m = math.Max(m, maxAbs(c))
	}
	if m == 0 || math.IsInf(m, 0) || math.IsNaN(m) {
		return 0
	}
	_, e := math.Frexp(m)
	return e
}

// maxAbs returns the largest |v| (NaN and ±Inf are not expected here).
func maxAbs(v []float64) float64 {
	var m float64
	for _, x := range v {
		if a := math.Abs(x); a > m {
			m = a
		}
	}
	return m
}

// inBand says whether a column whose largest magnitude is m can be used
// without rescaling.
func inBand(m float64) bool {
	return m == 0 || (m >= 0x1p-100 && m <= 0x1p100)
}

// ScaleFor returns the Scale that brings the largest magnitude of x and of
// sx into [1/2, 1), and that of y and sy (sx and sy may be nil: the
// standard uncertainties share the units of their values). It is the zero
// Scale when every column already lies in the band where no rescaling is
// needed.
func ScaleFor(x, y, sx, sy []float64) Scale {
	ex, ey := magnitude(x, sx), magnitude(y, sy)
	if math.Abs(float64(ex)) <= safeExp && math.Abs(float64(ey)) <= safeExp {
		return Scale{}
	}
	return Scale{X: ex, Y: ey}
}

// IsZero says whether s is the identity.
func (s Scale) IsZero() bool { return s == Scale{} }

// ScaleX returns x·2^−X in a new slice (v itself when X is 0); likewise ScaleY.
func (s Scale) ScaleX(v []float64) []float64 { return scaled(v, -s.X) }

// ScaleY returns y·2^−Y in a new slice (v itself when Y is 0).
func (s Scale) ScaleY(v []float64) []float64 { return scaled(v, -s.Y) }

func scaled(v []float64, e int) []float64 {
	if v == nil || e == 0 {
		return v
	}
	out := make([]float64, len(v))
	for i, x := range v {
		out[i] = math.Ldexp(x, e)
	}
	return out
}

// Lambda returns the error-variance ratio var(y error)/var(x error) in the
// rescaled units: λ·2^(2X−2Y). It may round to 0 or +Inf when the ratio
// leaves double precision; both are the limits Deming's slope formula
// handles (regression of x on y, and of y on x).
func (s Scale) Lambda(lambda float64) float64 {
	if math.IsInf(lambda, 1) {
		return lambda
	}
	return math.Ldexp(lambda, 2*(s.X-s.Y))
}

// Unscale transforms a Fit computed on data rescaled by s back to the
// original units: slopes by 2^(Y−X), intercepts, levels and residual SDs
// by 2^Y, cov(slope, intercept) by 2^(2Y−X), the centre's abscissa by 2^X.
// Dimensionless fields (R², χ², MSWD, p) and Lambda (the caller keeps the
// one it was given) are left alone. relativeResidual says that ResidualSD
// is dimensionless (weighted Deming).
func (s Scale) Unscale(f *Fit, relativeResidual bool) {
	if s.IsZero() {
		return
	}
	slope, level, cov := s.Y-s.X, s.Y, 2*s.Y-s.X
	scaleEstimate(&f.Slope, slope)
	scaleEstimate(&f.Intercept, level)
	f.CovSlopeIntercept = math.Ldexp(f.CovSlopeIntercept, cov)
	if !relativeResidual {
		f.ResidualSD = math.Ldexp(f.ResidualSD, level)
	}
	if c := f.Centre; c != nil {
		s.unscaleCentre(c)
	}
	if j := f.Jackknife; j != nil {
		scaleEstimate(&j.Slope, slope)
		scaleEstimate(&j.Intercept, level)
		j.Cov = math.Ldexp(j.Cov, cov)
		for i := range j.SlopeLOO {
			j.SlopeLOO[i] = math.Ldexp(j.SlopeLOO[i], slope)
		}
		for i := range j.InterceptLOO {
			j.InterceptLOO[i] = math.Ldexp(j.InterceptLOO[i], level)
		}
		if j.Centre != nil && j.Centre != f.Centre {
			s.unscaleCentre(j.Centre)
		}
	}
}

func (s Scale) unscaleCentre(c *Centre) {
	c.X = math.Ldexp(c.X, s.X)
	c.Y = math.Ldexp(c.Y, s.Y)
	c.SE = math.Ldexp(c.SE, s.Y)
	c.Cov = math.Ldexp(c.Cov, 2*s.Y-s.X)
}

func scaleEstimate(e *Estimate, k int) {
	e.Value = math.Ldexp(e.Value, k)
	e.SE = math.Ldexp(e.SE, k)
	e.SEScaled = math.Ldexp(e.SEScaled, k)
	e.CI.Lower = math.Ldexp(e.CI.Lower, k)
	e.CI.Upper = math.Ldexp(e.CI.Upper, k)
}

// sumSquares accumulates Σv² without overflow or underflow as scale²·ssq
// (the scaled update of LAPACK's dlassq, Anderson 2017).
type sumSquares struct{ scale, ssq float64 }

func (s *sumSquares) add(v float64) {
	a := math.Abs(v)
	if a == 0 {
		return
	}
	if s.scale < a {
		r := s.scale / a
		s.ssq = 1 + s.ssq*r*r
		s.scale = a
		return
	}
	r := a / s.scale
	s.ssq += r * r
}

// ratio returns Σu²/Σv² for u = s, v = t, or 0 and false when it leaves
// double precision or t is empty.
func (s sumSquares) ratio(t sumSquares) (float64, bool) {
	if t.scale == 0 || s.scale == 0 {
		return 0, false
	}
	fs, es := math.Frexp(s.scale)
	ft, et := math.Frexp(t.scale)
	q := math.Ldexp((fs/ft)*(fs/ft)*s.ssq/t.ssq, 2*(es-et))
	return q, allFinite(q) && q > 0
}

package eiv

import "math"

// Sample is a set of paired measurements in columns. SX, SY and R may be
// nil where the method does not need them (R nil means uncorrelated errors).
type Sample struct {
	X, Y   []float64
	SX, SY []float64
	R      []float64
}

// Len is the number of points.
func (s Sample) Len() int { return len(s.X) }

// An Estimator is a line-fitting method with its settings, in the form the
// resampling engines (bootstrap, jackknife) use. Every estimator in this
// package has one; a new method plugs into the bootstrap by implementing it.
type Estimator interface {
	// Method names the estimator.
	Method() Method
	// NewFitter returns a LineFitter with scratch space for samples of up
	// to n points. Each goroutine needs its own.
	NewFitter(n int) LineFitter
	// TruePoints writes the fitted true values of the points for the line
	// (a, b) into xh and yh: the centre of the parametric bootstrap.
	TruePoints(s Sample, a, b float64, xh, yh []float64)
}

// A LineFitter fits a line to a sample using only its own scratch space: it
// must not allocate, so that a bootstrap's hot loop allocates nothing.
type LineFitter interface {
	FitLine(s Sample) (intercept, slope float64, err error)
}

// OLSEstimator is ordinary least squares of y on x.
type OLSEstimator struct{}

func (OLSEstimator) Method() Method           { return MethodOLS }
func (OLSEstimator) NewFitter(int) LineFitter { return olsFitter{} }
func (OLSEstimator) TruePoints(s Sample, a, b float64, xh, yh []float64) {
	for i, x := range s.X {
		xh[i], yh[i] = x, a+b*x
	}
}

type olsFitter struct{}

func (olsFitter) FitLine(s Sample) (float64, float64, error) {
	return demingFitter{math.Inf(1)}.FitLine(s)
}

// DemingEstimator is Deming regression with error-variance ratio Lambda.
type DemingEstimator struct{ Lambda float64 }

func (DemingEstimator) Method() Method             { return MethodDeming }
func (e DemingEstimator) NewFitter(int) LineFitter { return demingFitter{e.Lambda} }
func (e DemingEstimator) TruePoints(s Sample, a, b float64, xh, yh []float64) {
	adjustDeming(s.X, s.Y, a, b, e.Lambda, xh, yh)
}

// adjustDeming moves each point to the line along the direction that
// Deming's weighting makes shortest: x̂ = x + b·d/(λ + b²), ŷ = a + b·x̂.
func adjustDeming(x, y []float64, a, b, lambda float64, xh, yh []float64) {
	den := lambda + b*b
	for i := range x {
		d := y[i] - a - b*x[i]
		xh[i] = x[i] + b*d/den
		yh[i] = a + b*xh[i]
	}
}

type demingFitter struct{ lambda float64 }

// FitLine fits the line from one-pass moments; when they over- or
// underflow (values outside the safe band of Scale) it fits the sample
// rescaled by powers of two instead, allocating the rescaled copy.
func (f demingFitter) FitLine(s Sample) (float64, float64, error) {
	m := shiftedMoments(s.X, s.Y)
	if !safeMoments(m) {
		sc := Scale{X: magnitude(s.X), Y: magnitude(s.Y)}
		if sc.IsZero() || !finiteColumns(s.X, s.Y) {
			return lineFrom(m, f.lambda)
		}
		a, b, err := lineFrom(centredMoments(sc.ScaleX(s.X), sc.ScaleY(s.Y)), sc.Lambda(f.lambda))
		return math.Ldexp(a, sc.Y), math.Ldexp(b, sc.Y-sc.X), err
	}
	return lineFrom(m, f.lambda)
}

// safeMoments reports that m lies in the band where demingFitter fits
// from the moments as they are.
func safeMoments(m moments) bool {
	return allFinite(m.sxx, m.syy, m.sxy, m.mx, m.my) && m.sxx >= 0x1p-800 && m.syy <= 0x1p800 && m.sxx <= 0x1p800
}

func finiteColumns(cols ...[]float64) bool {
	for _, c := range cols {
		for _, v := range c {
			if !(v-v == 0) {
				return false
			}
		}
	}
	return true
}

// lineFrom returns the Deming line (λ = +Inf: OLS) of moments m.
func lineFrom(m moments, lambda float64) (float64, float64, error) {
	if !(m.sxx > 0) {
		return 0, 0, ErrConstantX
	}
	if m.sxy == 0 && !math.IsInf(lambda, 1) {
		return 0, 0, ErrDegenerate
	}
	b := demingSlope(m.sxx, m.syy, m.sxy, lambda)
	a := m.my - b*m.mx
	if !allFinite(a, b) {
		return 0, 0, ErrDegenerate
	}
	return a, b, nil
}

// WeightedDemingEstimator is Linnet's weighted Deming regression.
type WeightedDemingEstimator struct {
	Lambda  float64
	Tol     float64 // zero means 1e-12
	MaxIter int     // zero means 100
}

func (WeightedDemingEstimator) Method() Method { return MethodWeightedDeming }
func (e WeightedDemingEstimator) NewFitter(n int) LineFitter {
	return wdFitter{newWDeming(&DemingOptions{Tol: e.Tol, MaxIter: e.MaxIter}, e.Lambda, n)}
}
func (e WeightedDemingEstimator) TruePoints(s Sample, a, b float64, xh, yh []float64) {
	adjustDeming(s.X, s.Y, a, b, e.Lambda, xh, yh)
}

type wdFitter struct{ wd *wDeming }

func (f wdFitter) FitLine(s Sample) (float64, float64, error) {
	for i := range s.X {
		if !(s.X[i] > 0 && s.Y[i] > 0) {
			return 0, 0, ErrNonPositiveLevel
		}
	}
	if !(centredMoments(s.X, s.Y).sxx > 0) {
		return 0, 0, ErrConstantX
	}
	a, b, _, _, err := f.wd.line(s.X, s.Y, 0, math.NaN())
	return a, b, err
}

// YorkEstimator is York's fit with per-point uncertainties and correlations.
type YorkEstimator struct {
	Tol     float64 // zero means 1e-15
	MaxIter int     // zero means 1000
}

func (YorkEstimator) Method() Method { return MethodYork }
func (e YorkEstimator) NewFitter(n int) LineFitter {
	return yorkFitter{newYork(&YorkOptions{Tol: e.Tol, MaxIter: e.MaxIter}, n)}
}

// TruePoints are York's adjusted points x_i = X̄ + β_i, ŷ = a + b·x_i.
func (e YorkEstimator) TruePoints(s Sample, a, b float64, xh, yh []float64) {
	yk := newYork(&YorkOptions{}, s.Len())
	x0, y0 := origin(s.X, s.Y)
	_, mx, my, err := yk.weights(s.X, s.Y, s.SX, s.SY, s.R, x0, y0, b)
	if err != nil { // cannot happen for a line York fitted to s; fall back to the observed x
		OLSEstimator{}.TruePoints(s, a, b, xh, yh)
		return
	}
	for i := range s.X {
		u, v := s.X[i]-x0-mx, s.Y[i]-y0-my
		xh[i] = x0 + mx + yk.w[i]*yorkBeta(u, v, b, s.SX[i], s.SY[i], rAt(s.R, i))
		yh[i] = a + b*xh[i]
	}
}

type yorkFitter struct{ yk *york }

// FitLine needs no separate check for constant x: the starting slope is
// then not finite and the iteration reports ErrDegenerate.
func (f yorkFitter) FitLine(s Sample) (float64, float64, error) {
	return f.yk.fitLine(s.X, s.Y, s.SX, s.SY, s.R)
}

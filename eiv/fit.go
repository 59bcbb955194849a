package eiv

import (
	"fmt"
	"math"
	"sync"
	"sync/atomic"

	"gonum.org/v1/gonum/stat/distuv"
)

// Method names an estimator.
type Method string

// The estimators.
const (
	MethodOLS            Method = "ols"
	MethodDeming         Method = "deming"
	MethodWeightedDeming Method = "weighted_deming"
	MethodYork           Method = "york"
)

// Interval is a two-sided confidence interval.
type Interval struct {
	Lower, Upper float64
	Level        float64 // nominal coverage, e.g. 0.95
	Method       string  // how it was formed: "t", "normal", "jackknife-t", ...
}

// Estimate is one fitted parameter with its uncertainty.
type Estimate struct {
	Value float64
	// SE is the standard error on the basis the method documents (see Fit).
	SE float64
	// SEScaled is SE multiplied by √MSWD (York only; zero otherwise).
	SEScaled float64
	// CI is the confidence interval at Fit.Confidence. An estimate without
	// uncertainty (Passing–Bablok with too few slopes, a comparison without
	// resamples or leave-one-out lines) has CI.Method empty, and its SE and
	// CI are then unset zeros, not values.
	CI Interval
}

// Fit is the result of one estimator. Fields that a method does not define
// are zero; the Method field says which apply.
type Fit struct {
	Method Method
	N      int // number of points used

	// Slope and Intercept of y = Intercept + Slope·x, in the units of y per
	// unit of x and of y. Standard-error basis by method:
	//   ols             classical, residual variance with n−2 df
	//   deming          large-sample (Fuller 1987, Theorem 1.3.1)
	//   weighted_deming jackknife (Linnet 1990)
	//   york            York et al. (2004), at the adjusted points, from the
	//                   stated uncertainties alone (unscaled)
	Slope, Intercept Estimate
	// CovSlopeIntercept is cov(slope, intercept) on the same basis as the SEs.
	CovSlopeIntercept float64
	// Centre is the line at a central abscissa with its uncertainty on the
	// same basis as the SEs, from which predictions are formed without the
	// cancellation of var(a) + x0²·var(b) + 2·x0·cov(a, b) far from the
	// origin. Nil when the method states none (At then uses that form).
	Centre *Centre
	// Confidence is the nominal level of every interval in the fit.
	Confidence float64

	// ResidualSD is √(Σe²/(n−2)) of the vertical residuals e = y − a − b·x
	// (ols, deming, weighted_deming). For weighted_deming the residuals are
	// weighted by 1/level, e_i/((x̂_i + ŷ_i)/2), so ResidualSD is a relative
	// SD (dimensionless, a coefficient of variation).
	ResidualSD float64
	// RSquared is the coefficient of determination (ols), in [0, 1].
	RSquared float64
	// Lambda is the error-variance ratio var(y error)/var(x error) used
	// (deming, weighted_deming; for weighted_deming the ratio of relative variances).
	Lambda float64

	// Chi2 is Σ W_i (y_i − a − b·x_i)² with York's weights W_i (york).
	Chi2 float64
	// DOF is n − 2.
	DOF int
	// MSWD is Chi2/DOF (york).
	MSWD float64
	// PValue is P(χ²_DOF ≥ Chi2): small values say the scatter exceeds the
	// stated uncertainties (york).
	PValue float64
	// Iterations done by an iterative method, and whether it met its tolerance.
	Iterations int
	Converged  bool

	// Jackknife holds leave-one-out standard errors and intervals, when computed.
	Jackknife *Jackknife

	// Warnings are non-fatal diagnostics, each a *Warning.
	Warnings []error
}

// Jackknife is the leave-one-out estimate of uncertainty (Quenouille 1956;
// Tukey 1958; as used for Deming by Linnet 1990, Stat. Med. 9:1463).
type Jackknife struct {
	Slope, Intercept Estimate // Value is the full-sample estimate; SE and CI from the jackknife
	Cov              float64  // jackknife covariance of slope and intercept
	// Pseudo holds the leave-one-out slopes and intercepts (length N each),
	// used for BCa acceleration. Nil when not kept.
	SlopeLOO, InterceptLOO []float64
	// Centre is the jackknife's uncertainty of the line at a central
	// abscissa and its covariance with the slope (nil when not computed).
	Centre *Centre
}

// Centre is a fitted line seen from a central abscissa X (the mean of x
// for OLS and Deming, the weighted mean for weighted Deming):
//
//	ŷ(x0) = Y + b·(x0 − X)
//	var ŷ(x0) = SE² + 2·(x0 − X)·Cov + (x0 − X)²·var(b)
//
// Every term is small where the data are, so the form keeps its digits
// when x is far from 0 (x ~ 1e9 with a spread of 1).
type Centre struct {
	X, Y float64
	SE   float64 // standard error of ŷ(X)
	Cov  float64 // cov(ŷ(X), b); 0 for OLS and Deming at the mean of x
}

// DefaultConfidence is the confidence level used when an option leaves it zero.
const DefaultConfidence = 0.95

func checkConfidence(c float64) (float64, error) {
	if c == 0 {
		return DefaultConfidence, nil
	}
	if !(c > 0 && c < 1) {
		return 0, &OptionError{Option: "confidence", Reason: "must lie strictly between 0 and 1"}
	}
	return c, nil
}

// tQuantile returns the two-sided critical value of Student's t with df degrees
// of freedom at the given confidence. The inverse incomplete beta function
// behind it costs microseconds, so values are remembered (up to
// quantileCacheMax distinct pairs, so that no client can grow the cache
// without bound).
func tQuantile(conf float64, df int) float64 {
	k := quantileKey{conf, df}
	if v, ok := quantileCache.Load(k); ok {
		return v.(float64)
	}
	q := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(df)}.Quantile(0.5 + conf/2)
	if quantileCount.Add(1) <= quantileCacheMax {
		quantileCache.Store(k, q)
	}
	return q
}

type quantileKey struct {
	conf float64
	df   int
}

const quantileCacheMax = 4096

var (
	quantileCache sync.Map
	quantileCount atomic.Int64
)

// zQuantile returns the two-sided standard normal critical value.
func zQuantile(conf float64) float64 {
	return distuv.UnitNormal.Quantile(0.5 + conf/2)
}

func symmetric(v, half, level float64, method string) Interval {
	return Interval{Lower: v - half, Upper: v + half, Level: level, Method: method}
}

func allFinite(v ...float64) bool {
	for _, f := range v {
		if math.IsNaN(f) || math.IsInf(f, 0) {
			return false
		}
	}
	return true
}

// finite is the last check of every estimator: a result with a NaN or an
// infinity anywhere (slopes near the double limits, a degenerate
// jackknife) is an error, never an answer.
func (f *Fit) finite() error {
	ok := allFinite(f.Slope.Value, f.Slope.SE, f.Slope.SEScaled, f.Slope.CI.Lower, f.Slope.CI.Upper,
		f.Intercept.Value, f.Intercept.SE, f.Intercept.SEScaled, f.Intercept.CI.Lower, f.Intercept.CI.Upper,
		f.CovSlopeIntercept, f.ResidualSD, f.RSquared, f.Lambda, f.Chi2, f.MSWD, f.PValue)
	if j := f.Jackknife; j != nil {
		ok = ok && allFinite(j.Slope.SE, j.Slope.CI.Lower, j.Slope.CI.Upper, j.Intercept.SE, j.Intercept.CI.Lower, j.Intercept.CI.Upper, j.Cov)
		if c := j.Centre; c != nil {
			ok = ok && allFinite(c.X, c.Y, c.SE, c.Cov)
		}
	}
	if c := f.Centre; c != nil {
		ok = ok && allFinite(c.X, c.Y, c.SE, c.Cov)
	}
	if !ok {
		return fmt.Errorf("%w: %s's result leaves the double-precision range", ErrDegenerate, f.Method)
	}
	return nil
}

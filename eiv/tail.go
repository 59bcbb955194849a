package eiv

import (
	"math"

	"gonum.org/v1/gonum/mathext"
	"gonum.org/v1/gonum/stat/distuv"
)

// Tail probabilities for the p-values. Each is computed in the tail it
// reports, never as 1 − CDF or ½(1 − erf), whose cancellation loses every
// digit below about 1e-16 and returns exactly 0 there, although doubles
// represent p-values down to about 1e-308.

// normalSF is P(Z > z) for the standard normal, ½·erfc(z/√2). The rounding
// of z/√2 costs about z²·ε relative (about 3e-13 at z = 37, where the
// value reaches the smallest normal double).
func normalSF(z float64) float64 { return 0.5 * math.Erfc(z/math.Sqrt2) }

// normalCDF is P(Z ≤ z), ½·erfc(−z/√2), accurate in the lower tail.
func normalCDF(z float64) float64 { return 0.5 * math.Erfc(-z/math.Sqrt2) }

// normalTwoSided is P(|Z| ≥ |z|) = erfc(|z|/√2).
func normalTwoSided(z float64) float64 { return math.Erfc(math.Abs(z) / math.Sqrt2) }

// tTwoSided is P(|T| ≥ |t|) for Student's t on nu degrees of freedom,
// I_{ν/(ν+t²)}(ν/2, ½). gonum's regularized incomplete beta evaluates this
// tail directly; checked against mpmath to 1e-11 relative down to 1e-300
// (TestTailProbabilitiesAgainstMpmath).
func tTwoSided(t, nu float64) float64 {
	return 2 * distuv.StudentsT{Mu: 0, Sigma: 1, Nu: nu}.Survival(math.Abs(t))
}

// chiSquaredSF is P(χ²_k > x), the regularized upper incomplete gamma
// Q(k/2, x/2), evaluated in the upper tail by gonum.
func chiSquaredSF(x, k float64) float64 { return distuv.ChiSquared{K: k}.Survival(x) }

// fSurvival is P(F > f) for Snedecor's F on (d1, d2) degrees of freedom,
// I_{d2/(d2 + d1·f)}(d2/2, d1/2): the upper tail as a lower incomplete beta,
// not 1 − CDF (gonum's F.Survival, which is 1.1e-16 where the true value
// is 2e-39).
func fSurvival(f, d1, d2 float64) float64 {
	if !(f > 0) {
		return 1
	}
	return mathext.RegIncBeta(d2/2, d1/2, d2/(d2+d1*f))
}

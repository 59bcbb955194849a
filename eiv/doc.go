// Package eiv fits straight lines y = a + b·x when both x and y are
// measured with error.
//
// Ordinary least squares (OLS) treats x as exact. When x carries error the
// OLS slope is biased toward zero by the reliability ratio
//
//	κ = var(true x) / var(observed x) = 1 − var(x error)/var(observed x)
//
// (regression dilution), the intercept shifts to compensate, and the bias
// of y against x at any level is mis-stated. The estimators here model the
// error in both axes:
//
//   - OLS: y on x, the comparison baseline (NIST StRD accuracy).
//   - Deming: a known ratio λ = var(y error)/var(x error) of constant error
//     variances; closed form. λ = 1 is orthogonal regression.
//   - WeightedDeming: errors proportional to the level (constant
//     coefficients of variation), by Linnet's iterative reweighting.
//   - York: per-point standard uncertainties σx, σy and error correlations
//     r, by York et al. (2004); σx = 0 gives weighted least squares in y.
//
// Each estimator takes data slices and an options pointer (nil means the
// documented defaults) and returns a *Fit whose fields document their
// units and standard-error basis. Bad data is an error (see ErrTooFewPoints,
// *PointError, *ConvergenceError), never a panic and never a NaN.
//
// Uncertainty comes three ways: each method's analytic standard errors; the
// jackknife (leave-one-out; Linnet 1990); and Bootstrap, which refits any
// set of Estimators on the same resamples (pairs or parametric), in
// parallel and reproducibly from one seed, and summarises any Statistic of
// the lines with percentile and BCa intervals (Efron 1987). CompareOLS
// turns paired fits into the OLS bias: the differences of slope and
// intercept with intervals, the reliability ratio, the bias at decision
// levels, and a sentence.
//
// References:
//
//	Deming, W. E. (1943). Statistical Adjustment of Data. Wiley.
//	Efron, B. (1987). Better bootstrap confidence intervals. JASA 82:171–185.
//	Fuller, W. A. (1987). Measurement Error Models. Wiley. §1.3.
//	Linnet, K. (1990). Estimation of the linear relationship between the
//	  measurements of two methods with proportional errors. Stat. Med. 9:1463–1473.
//	Linnet, K. (1993). Evaluation of regression procedures for methods
//	  comparison studies. Clin. Chem. 39:424–432.
//	York, D., Evensen, N. M., López Martínez, M. & De Basabe Delgado, J.
//	  (2004). Unified equations for the slope, intercept, and standard
//	  errors of the best straight line. Am. J. Phys. 72:367–375.
//
// The package does no I/O: no HTTP, no JSON, no logging.
package eiv

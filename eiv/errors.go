package eiv

import (
	"errors"
	"fmt"
)

// Sentinel errors. Each is wrapped by a more specific error where a point or an
// option is to blame, so callers can test with errors.Is and still show the
// index or name with errors.As.
var (
	// ErrTooFewPoints: a straight line with a residual spread needs at least three points.
	ErrTooFewPoints = errors.New("eiv: too few points (need at least 3)")
	// ErrLengthMismatch: the data slices have different lengths.
	ErrLengthMismatch = errors.New("eiv: data slices differ in length")
	// ErrConstantX: every x is the same, so no slope can be estimated.
	ErrConstantX = errors.New("eiv: all x values are equal")
	// ErrNonFinite: a value is NaN or infinite.
	ErrNonFinite = errors.New("eiv: value is not a finite number")
	// ErrInvalidUncertainty: a standard uncertainty is negative, or both
	// uncertainties of a point are zero where the method needs a weight.
	ErrInvalidUncertainty = errors.New("eiv: invalid standard uncertainty")
	// ErrInvalidCorrelation: an error correlation is outside (-1, 1).
	ErrInvalidCorrelation = errors.New("eiv: error correlation must lie strictly between -1 and 1")
	// ErrNonPositiveLevel: a method for level-proportional errors met a level at or below zero.
	ErrNonPositiveLevel = errors.New("eiv: level-proportional errors need positive values")
	// ErrInvalidOption: an option is out of its documented range.
	ErrInvalidOption = errors.New("eiv: invalid option")
	// ErrDegenerate: the data admit no unique finite line (for example no
	// relation between x and y at all, or values so large that double
	// precision overflows).
	ErrDegenerate = errors.New("eiv: the data do not determine a finite line")
	// ErrMagnitude: values so large or so small that their squares leave
	// the double-precision range (|v| > 1e150 or 0 < max|v| < 1e-150).
	ErrMagnitude = errors.New("eiv: values beyond 1e150 or all below 1e-150 in magnitude cannot be fitted in double precision; rescale the units")
	// ErrNotConverged: an iterative estimator stopped at its iteration cap.
	ErrNotConverged = errors.New("eiv: iteration did not converge")
)

// PointError reports a problem with one data point.
type PointError struct {
	Index int    // zero-based index of the point
	Field string // "x", "y", "sx", "sy" or "r"
	Err   error  // one of the sentinel errors
}

func (e *PointError) Error() string {
	return fmt.Sprintf("eiv: point %d, %s: %s", e.Index+1, e.Field, trimPrefix(e.Err.Error()))
}

func (e *PointError) Unwrap() error { return e.Err }

// OptionError reports an option outside its range.
type OptionError struct {
	Option string // the option's name, e.g. "confidence" or "lambda"
	Reason string
}

func (e *OptionError) Error() string { return "eiv: option " + e.Option + ": " + e.Reason }

func (e *OptionError) Unwrap() error { return ErrInvalidOption }

// ConvergenceError reports an iterative fit that reached its iteration cap.
type ConvergenceError struct {
	Method     Method
	Iterations int     // iterations done
	Change     float64 // relative change of the slope in the last iteration
}

func (e *ConvergenceError) Error() string {
	return fmt.Sprintf("eiv: %s did not converge in %d iterations (last relative slope change %.3g)",
		e.Method, e.Iterations, e.Change)
}

func (e *ConvergenceError) Unwrap() error { return ErrNotConverged }

func trimPrefix(s string) string {
	const p = "eiv: "
	if len(s) >= len(p) && s[:len(p)] == p {
		return s[len(p):]
	}
	return s
}

// Warning is a non-fatal diagnostic attached to a result. Code is a stable,
// machine-readable name; Message is a sentence for people.
type Warning struct {
	Code    string
	Message string
}

func (w *Warning) Error() string { return w.Message }

// Warning codes.
const (
	WarnLambdaAssumed      = "lambda_assumed"
	WarnScatterExceeds     = "scatter_exceeds_uncertainties"
	WarnJackknifeSkipped   = "jackknife_skipped"
	WarnBootstrapFailures  = "bootstrap_failures"
	WarnBootstrapSkipped   = "bootstrap_skipped"
	WarnFewPoints          = "few_points"
	WarnPerfectFit         = "perfect_fit"
	WarnNoUncertaintyInX   = "no_uncertainty_in_x"
	WarnReliabilityUnknown = "reliability_unknown"
)

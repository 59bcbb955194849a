// Package study computes what a user's study asks for, in plain Go types:
// a straight-line fit of paired measurements by every method the data
// support (Fit), and a method-comparison study of a candidate method against
// the comparative method in service (Compare), with the checks of the
// assumptions, the recommendation of the fit to report and its reasons, and
// a reading of every check in words.
//
// It holds the policy between the estimators of package eiv and a user's
// question: which methods run by default, where Deming's error-variance
// ratio λ comes from, how the bootstrap pairs every method with OLS, and
// how bias at a decision level is judged against an allowable bias. It
// knows nothing of HTTP, JSON or CSV: package api/wire decodes requests
// into Data, Samples and the options, locates a study Error in the
// request (a JSON pointer, a CSV row and column, a query parameter or a
// command-line flag), and encodes the results.
//
// What counts as a method is the one registry Methods: a new estimator
// needs one entry there.
//
// Errors are *Error (or ErrorList for several invalid options at once), with
// a Kind (Invalid, Unfittable, TooLarge) and the offending field, point
// index or method.
package study

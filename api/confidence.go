package api

import "fmt"

// The confidence levels taken. An interval at level c uses the quantiles
// at (1 ± c)/2; in double precision 1 − c must stay well above the spacing
// of numbers near 1 (2.2e-16) for the tail probability, and so the
// quantile, to mean anything: at 0.9999999999999999 the upper quantile
// probability rounds to exactly 1 and the quantile is infinite. Bounding c
// to [1e-9, 1 − 1e-9] keeps the tail probability to seven significant
// digits or better, covers every level in use (0.68 to 0.999999, about
// ±5σ), and keeps the interval from collapsing to a point at the low end.
const (
	MinConfidence = 1e-9
	MaxConfidence = 1 - 1e-9
)

// CheckConfidence says why c is not a usable confidence level, or returns
// nil. The message names no field: callers add the JSON pointer, query
// parameter or flag.
func CheckConfidence(c float64) error {
	if !(c >= MinConfidence && c <= MaxConfidence) {
		return fmt.Errorf("confidence must lie between %g and %.9f (e.g. 0.95), not %v: closer to 0 or 1 its quantiles are not resolved in double precision",
			MinConfidence, MaxConfidence, c)
	}
	return nil
}

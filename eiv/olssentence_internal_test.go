package eiv

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"
)

// TestOLSSentence: "OLS would understate the slope" only when the interval
// of the relative slope difference excludes zero (issue 18).
func TestOLSSentence(t *testing.T) {
	iv := func(v, lo, hi float64) Estimate {
		return Estimate{Value: v, CI: Interval{Lower: lo, Upper: hi, Level: 0.95, Method: "paired jackknife-t"}}
	}
	cases := []struct {
		name    string
		rel     Estimate
		want    string
		mustNot string
	}{
		{"understates, interval excludes 0", iv(-1.2, -2, -0.4), "OLS would understate the slope by 1.2 % (95 % CI 0.4 to 2 %)", "includes no difference"},
		{"overstates, interval excludes 0", iv(0.8, 0.1, 1.5), "OLS would overstate the slope by 0.8 %", "includes no difference"},
		{"interval includes 0", iv(-1.53, -3.09, 0.026), "OLS and deming differ in slope by -1.53 % (95 % CI -3.09 to 0.026 %: the interval includes no difference)", "understate"},
		{"no interval", Estimate{Value: -0.125}, "OLS and deming differ in slope by -0.125 % (no interval", "understate"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			c := &OLSComparison{Method: MethodDeming, SlopeRelative: tc.rel}
			s := c.sentence(0.95)
			if !strings.Contains(s, tc.want) || strings.Contains(s, tc.mustNot) {
				t.Errorf("sentence %q: want %q, not %q", s, tc.want, tc.mustNot)
			}
		})
	}
}

// sentenceFmt is the sentence as fmt.Sprintf writes it: the reference
// (Go's fmt package) for TestSentenceMatchesFmt.
func sentenceFmt(c *OLSComparison, conf float64) string {
	r := c.SlopeRelative
	var s string
	switch {
	case r.CI.Method != "" && (r.CI.Lower > 0 || r.CI.Upper < 0):
		verb, mag, lo, hi := "overstate", r.Value, r.CI.Lower, r.CI.Upper
		if r.Value < 0 {
			verb, mag, lo, hi = "understate", -r.Value, -r.CI.Upper, -r.CI.Lower
		}
		s = fmt.Sprintf("Compared with %s, OLS would %s the slope by %.3g %% (%g %% CI %.3g to %.3g %%)", c.Method, verb, mag, 100*conf, lo, hi)
	case r.CI.Method != "":
		s = fmt.Sprintf("OLS and %s differ in slope by %+.3g %% (%g %% CI %.3g to %.3g %%: the interval includes no difference)",
			c.Method, r.Value, 100*conf, r.CI.Lower, r.CI.Upper)
	default:
		s = fmt.Sprintf("OLS and %s differ in slope by %+.3g %% (no interval: the difference is not shown to be real)", c.Method, r.Value)
	}
	if len(c.At) > 0 {
		s += fmt.Sprintf("; at x = %g the OLS line differs from it by %+.3g", c.At[0].X, c.At[0].Difference)
	}
	if c.HasReliability {
		s += fmt.Sprintf("; the reliability ratio κ = %.4g predicts an OLS slope of %.4g", c.Reliability, c.PredictedOLSSlope)
	}
	return s + "."
}

// TestSentenceMatchesFmt: the sentence, written with strconv, is byte for
// byte what fmt.Sprintf writes, on every branch, for random magnitudes
// (seeded) and the special values (±0, ±Inf, NaN, the extremes).
func TestSentenceMatchesFmt(t *testing.T) {
	rng := rand.New(rand.NewPCG(20, 1))
	special := []float64{0, math.Copysign(0, -1), math.Inf(1), math.Inf(-1), math.NaN(),
		math.MaxFloat64, -math.SmallestNonzeroFloat64, 1e21, 1e-5, 0.0001, 999.95, -0.00099995, 123456}
	value := func() float64 {
		if rng.IntN(4) == 0 {
			return special[rng.IntN(len(special))]
		}
		return (rng.Float64() - 0.5) * math.Pow(10, float64(rng.IntN(40)-20))
	}
	for _, branch := range []struct {
		name   string
		method string
		lo, hi float64 // the interval's sign pattern (scaled below)
	}{
		{"excludes zero", "paired jackknife-t", 1, 2},
		{"excludes zero, negative", "paired bootstrap percentile", -2, -1},
		{"includes zero", "paired jackknife-t", -1, 1},
		{"no interval", "", 0, 0},
	} {
		t.Run(branch.name, func(t *testing.T) {
			for k := range 2000 {
				v := value()
				m := math.Abs(value())
				c := &OLSComparison{Method: MethodYork, SlopeRelative: Estimate{Value: v,
					CI: Interval{Lower: branch.lo * m, Upper: branch.hi * m, Method: branch.method}}}
				if k%2 == 0 {
					c.At = []BiasShift{{X: value(), Difference: value()}}
				}
				if k%3 == 0 {
					c.HasReliability, c.Reliability, c.PredictedOLSSlope = true, value(), value()
				}
				conf := []float64{0.95, 0.9, 0.99, 0.683, rng.Float64()}[k%5]
				if got, want := c.sentence(conf), sentenceFmt(c, conf); got != want {
					t.Fatalf("case %d:\n got %q\nwant %q", k, got, want)
				}
			}
		})
	}
}

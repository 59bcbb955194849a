package eiv

import (
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

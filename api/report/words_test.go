package report

import (
	"strings"
	"testing"

	"eivfit/api/wire"
)

// The OLS sentence asserts a direction only when the interval of the
// relative slope difference excludes zero (issue 19: "OLS understates the
// slope by 0.125 % (95 % CI −0.995 to 1.25 %)" asserted one the interval
// did not support), and names the method by its display name.
func TestOLSSentenceDirection(t *testing.T) {
	ci := func(lo, hi float64) wire.CI { return wire.CI{Lower: lo, Upper: hi, Level: 0.95, Method: "delta"} }
	for _, c := range []struct {
		name      string
		method    string
		rel       wire.Interval
		direction string // "" when no direction word may appear
		want      string
	}{
		{"interval includes 0 (the issue's case)", "weighted_deming", wire.Interval{Estimate: 0.125, CI: ci(-0.995, 1.25)}, "",
			"OLS and weighted Deming differ in slope by +0.125 % (95 % CI −0.995 to 1.25 %: the interval includes no difference)"},
		{"negative estimate, interval includes 0", "passing_bablok", wire.Interval{Estimate: -1.53, CI: ci(-3.09, 0.026)}, "",
			"OLS and Passing–Bablok differ in slope by −1.53 %"},
		{"interval below 0", "deming", wire.Interval{Estimate: -0.216, CI: ci(-0.339, -0.0935)}, "understate",
			"Compared with Deming, OLS would understate the slope by 0.216 % (95 % CI 0.0935 to 0.339 %)"},
		{"interval above 0", "york", wire.Interval{Estimate: 2.5, CI: ci(0.5, 4.5)}, "overstate",
			"Compared with York, OLS would overstate the slope by 2.5 % (95 % CI 0.5 to 4.5 %)"},
		{"no interval", "passing_bablok", wire.Interval{Estimate: -0.125}, "",
			"OLS and Passing–Bablok differ in slope by −0.125 % (no interval: the difference is not shown to be real)"},
		{"interval touching 0 includes it", "deming", wire.Interval{Estimate: 0.3, CI: ci(0, 0.6)}, "", "the interval includes no difference"},
	} {
		t.Run(c.name, func(t *testing.T) {
			s := olsSentence(wire.OLSBias{Method: c.method, SlopeRelativePercent: c.rel}, 0.95, "mmol/L")
			if !strings.Contains(s, c.want) {
				t.Errorf("got  %s\nwant %s", s, c.want)
			}
			for _, w := range []string{"understate", "overstate", "underestimate", "overestimate"} {
				if strings.Contains(s, w) != (w == c.direction) {
					t.Errorf("direction word %q present = %v in %q", w, strings.Contains(s, w), s)
				}
			}
			if strings.Contains(s, c.method) && c.method != methodName(c.method) {
				t.Errorf("identifier %q in %q", c.method, s)
			}
		})
	}
}

// York's reading follows its χ² test: consistent, more scatter than the
// uncertainties explain, or less.
func TestYorkReading(t *testing.T) {
	f := func(v float64) *float64 { return &v }
	for _, c := range []struct {
		name      string
		mswd, p   float64
		want      string
		alertWant bool
	}{
		{"consistent", 1.05, 0.4, "what the stated uncertainties lead one to expect", false},
		{"too much scatter", 3.2, 0.001, "larger than the stated uncertainties explain", true},
		{"too little scatter", 0.2, 0.99, "smaller than the stated uncertainties lead one to expect", false},
	} {
		t.Run(c.name, func(t *testing.T) {
			y := &wire.MethodFit{Chi2: f(c.mswd * 10), DOF: 10, MSWD: f(c.mswd), PValue: f(c.p)}
			s := yorkText(y)
			if !strings.Contains(s, c.want) || !strings.Contains(s, "ν = 10") || !strings.HasPrefix(s, "York: χ² = ") {
				t.Errorf("%s", s)
			}
			if yorkInconsistent(y) != c.alertWant {
				t.Errorf("alert %v, want %v", yorkInconsistent(y), c.alertWant)
			}
		})
	}
}

// InputOf counts the lines a CSV reader skips (comments and blank lines,
// after a byte-order mark) and hashes the bytes as received.
func TestInputOf(t *testing.T) {
	for _, c := range []struct {
		name    string
		raw     string
		csv     bool
		skipped int
	}{
		{"no comments", "x,y\n1,2\n2,3\n", true, 0},
		{"comments and a blank line", "# a\n#b\nx,y\n1,2\n\n2,3\n", true, 3},
		{"indented comment, CRLF", "\xef\xbb\xbf# a\r\n  # b\r\nx,y\r\n1,2\r\n", true, 2},
		{"JSON counts nothing", "{\"points\":[]}\n\n", false, 0},
	} {
		t.Run(c.name, func(t *testing.T) {
			in := InputOf([]byte(c.raw), c.csv)
			if in.Skipped != c.skipped || in.Bytes != len(c.raw) || len(in.SHA256) != 64 {
				t.Errorf("%+v, want %d skipped", in, c.skipped)
			}
		})
	}
}

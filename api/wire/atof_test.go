package wire

import (
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
	"testing"
)

// parseFloat must agree with strconv.ParseFloat bit for bit on the plain
// decimals it accepts.
func TestParseFloatMatchesStrconv(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	fixed := []string{"0", "-0", "1", "12.5", "0.1", "-0.000123", "123456789012345678", "9007199254740993",
		"1e22", "1e23", "1e-22", "1.7976931348623157e308", "00012", "1.", ".5",
		"2.2250738585072014e-308", "0e-400", "-0.0E+999", "0.30000000000000004", "1234567890.0987654321", "7e-10", "1E5", "1e+5"}
	check := func(s string) {
		want, werr := strconv.ParseFloat(s, 64)
		got, ok := parseFloat([]byte(s))
		// Decimals only: Go's hexadecimal floats and digit separators are refused.
		wok := werr == nil && !math.IsInf(want, 0) && !math.IsNaN(want) && !strings.ContainsAny(s, "xX_")
		if ok != wok || (ok && math.Float64bits(got) != math.Float64bits(want)) {
			t.Errorf("%q: got %v (%v), strconv %v (%v)", s, got, ok, want, werr)
		}
	}
	for _, s := range fixed {
		check(s)
	}
	for range 200000 {
		v := math.Exp(r.NormFloat64()*10) * float64(1-2*r.IntN(2))
		check(strconv.FormatFloat(v, 'g', 1+r.IntN(17), 64))
		check(strconv.FormatFloat(v, 'f', r.IntN(12), 64))
		check(strconv.FormatFloat(v, 'e', r.IntN(16), 64))
	}
	for _, s := range []string{"", "-", "e5", "1e", "1e+", "abc", "1.2.3", "NaN", "Inf", "-Infinity", "1,5", "0x10"} {
		check(s)
	}
}

// Number syntax a spreadsheet would not write is refused, and so are
// values that strconv would take by rounding them to 0 or to a subnormal.
func TestParseFloatRefuses(t *testing.T) {
	for _, s := range []string{"+3", "+5", "1_000", "1_000.5", "0x1p3", "0X10", "0x1.8p1", "inf", "Infinity", "nan",
		"1e400", "-1e400", "1e-400", "-1e-400", "5e-324", "4.9e-324", "2.2e-308", "1 000", " 1", "1e5.5"} {
		if v, ok := parseFloat([]byte(s)); ok {
			t.Errorf("%q read as %v, want refused", s, v)
		}
		if numberError([]byte(s)) == nil {
			t.Errorf("%q: no reason given", s)
		}
	}
}

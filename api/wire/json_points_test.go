package wire

import (
	"math"
	"math/rand/v2"
	"strconv"
	"testing"
)

// TestJSONNumber: the one-pass reading of plain JSON numbers equals
// strconv.ParseFloat bit for bit (Go's correctly rounded conversion, the
// outside reference), and numbers off the plain path (exponents, many
// digits, leading zeros, malformed) are delimited and refused as
// numberEnd and parseFloat do.
func TestJSONNumber(t *testing.T) {
	tests := []struct {
		name string
		in   string
		end  int // -1: no number
		ok   bool
	}{
		{"integer", "42,", 2, true},
		{"negative zero", "-0}", 2, true},
		{"fraction", "54.12345678]", 11, true},
		{"tiny fraction", "0.0000000000000000000001", 24, true},
		{"22 places", "0.1234567890123456789012", 24, true},
		{"2^53 - 1", "9007199254740991", 16, true},
		{"2^53", "9007199254740992", 16, true},
		{"19 digits", "1234567890.123456789", 20, true},
		{"20 digits", "12345678901234567890", 20, true},
		{"exponent", "1.5e-7 ", 6, true},
		{"capital exponent", "2E+3", 4, true},
		{"leading zero", "01", 1, true},
		{"leading zeros before a point", "00.5", 1, true},
		{"point without digits", "1.", -1, false},
		{"point first", ".5", -1, false},
		{"minus alone", "-", -1, false},
		{"minus point", "-.5", -1, false},
		{"exponent without digits", "1e", -1, false},
		{"overflow", "1e400", 5, false},
		{"below normal", "1e-320", 6, false},
		{"empty", "", -1, false},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			v, end, ok := jsonNumber([]byte(tc.in), 0)
			if end != tc.end || ok != tc.ok {
				t.Fatalf("end %d ok %v, want %d %v", end, ok, tc.end, tc.ok)
			}
			if !ok {
				return
			}
			want, err := strconv.ParseFloat(tc.in[:end], 64)
			if err != nil || math.Float64bits(v) != math.Float64bits(want) {
				t.Fatalf("%v, strconv %v (%v)", v, want, err)
			}
		})
	}
	// Seeded random decimals of 1 to 19 digits with 0 to 22 places, as
	// instruments and spreadsheets write them; exact: no tolerance.
	r := rand.New(rand.NewPCG(3, 4))
	for range 200_000 {
		digits := 1 + r.IntN(19)
		s := strconv.FormatUint(r.Uint64N(pow10u(digits)), 10)
		if places := r.IntN(min(len(s), 22) + 1); places > 0 && places < len(s) {
			s = s[:len(s)-places] + "." + s[len(s)-places:]
		}
		if r.IntN(2) == 0 {
			s = "-" + s
		}
		v, end, ok := jsonNumber([]byte(s), 0)
		want, err := strconv.ParseFloat(s, 64)
		if !ok || end != len(s) || err != nil || math.Float64bits(v) != math.Float64bits(want) {
			t.Fatalf("%s: %v (end %d, ok %v), strconv %v", s, v, end, ok, want)
		}
	}
}

func pow10u(n int) uint64 {
	p := uint64(1)
	for range n {
		p *= 10
	}
	return p
}

// FuzzJSONNumber: the one-pass reading agrees with delimiting by
// numberEnd and converting by parseFloat on any bytes.
func FuzzJSONNumber(f *testing.F) {
	for _, s := range []string{"1", "-0.5", "01", "1.", "1e5", "9007199254740993", "0.1234567890123456789012345", "-"} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, b []byte) {
		v, end, ok := jsonNumber(b, 0)
		wantEnd := numberEnd(b, 0)
		if end != wantEnd {
			t.Fatalf("end %d, numberEnd %d", end, wantEnd)
		}
		if end < 0 {
			return
		}
		want, wantOK := parseFloat(b[:end])
		if ok != wantOK || ok && math.Float64bits(v) != math.Float64bits(want) {
			t.Fatalf("%v %v, parseFloat %v %v", v, ok, want, wantOK)
		}
	})
}

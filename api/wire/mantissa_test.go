package wire

import (
	"bytes"
	"fmt"
	"math"
	"math/rand/v2"
	"strconv"
	"testing"
)

// mantissaRef is what mantissa16 must answer for the sixteen bytes b,
// worked out one byte at a time: the length, the point's lane (16: none)
// and the digits' value; length 0 when there is no mantissa to take.
func mantissaRef(b []byte) (value uint64, length, dot int) {
	length, dot = -1, 16
	for k, c := range b[:16] {
		if c != '.' && (c < '0' || c > '9') {
			length = k
			break
		}
	}
	if length < 0 {
		return 0, 0, 16 // no end within the sixteen bytes
	}
	var digits []byte
	for k, c := range b[:length] {
		if c == '.' {
			if dot != 16 {
				return 0, 0, 16 // a second point
			}
			dot = k
			continue
		}
		digits = append(digits, c)
	}
	if len(digits) == 0 {
		return 0, 0, 16
	}
	v, err := strconv.ParseUint(string(digits), 10, 64)
	if err != nil {
		panic(err)
	}
	return v, length, dot
}

// TestMantissa16: the lane-parallel reading against mantissaRef on every
// length and point of numbers as instruments write them, on a million
// random sixteen-byte windows over digits, points, delimiters and bytes
// near them (every byte value next to '0', '9' and '.', and the high
// bytes), and on every single byte in every lane.
func TestMantissa16(t *testing.T) {
	if !haveMantissa16 {
		t.Skip("mantissa16 does not run on this processor")
	}
	check := func(b []byte) {
		t.Helper()
		lo, hi, length, dot := mantissa16(&b[0])
		want, wlen, wdot := mantissaRef(b)
		if length != wlen || length > 0 && (dot != wdot || mantissaOf(lo, hi) != want) {
			t.Fatalf("%q: length %d, point %d, value %d; want %d, %d, %d", b, length, dot, mantissaOf(lo, hi), wlen, wdot, want)
		}
	}
	r := rand.New(rand.NewPCG(16, 1))
	for l := 1; l < 16; l++ {
		for p := -1; p < l; p++ {
			for range 200 {
				b := make([]byte, 16)
				for k := range b {
					b[k] = byte('0' + r.IntN(10))
				}
				if p >= 0 {
					b[p] = '.'
				}
				b[l] = ",\n\r e;-"[r.IntN(7)]
				check(b)
			}
		}
	}
	const alphabet = "0123456789012345678901234567890123456789....,,\n\r e-+/:\x00\x7f\x80\xae\xb0\xb9\xff"
	for range 1_000_000 {
		b := make([]byte, 16)
		for k := range b {
			b[k] = alphabet[r.IntN(len(alphabet))]
		}
		check(b)
	}
	for lane := range 16 {
		for c := range 256 {
			b := []byte("1234567890123456")
			b[lane] = byte(c)
			check(b)
		}
	}
}

// scanBoth reads b at i with and without mantissa16, as a CSV cell
// (scanFloat) and as a JSON number (jsonNumber), and says how they differ
// ("" when they do not): value bits, end and ok. It switches the package's
// haveMantissa16, so no test that reads numbers may run beside it in
// parallel (none in this package does).
func scanBoth(b []byte, i int) string {
	for _, read := range []struct {
		name string
		f    func([]byte, int) (float64, int, bool)
	}{{"scanFloat", scanFloat}, {"jsonNumber", jsonNumber}} {
		v, end, ok := read.f(b, i)
		haveMantissa16 = false
		w, wend, wok := read.f(b, i)
		haveMantissa16 = true
		if math.Float64bits(v) != math.Float64bits(w) || end != wend || ok != wok {
			return fmt.Sprintf("%s(%q, %d): %v %d %v with sixteen bytes at once, %v %d %v one at a time", read.name, b, i, v, end, ok, w, wend, wok)
		}
	}
	return ""
}

// TestScanFloatSixteenBytes: scanFloat and jsonNumber answer the same
// with mantissa16 as one digit at a time (the readings TestScanFloatExact
// and TestJSONNumber hold to strconv) on the adversarial and random
// decimals, JSON's edge cases and random strings over the number
// alphabet, each followed by a delimiter and enough bytes for the
// sixteen-byte reading (and by exactly enough, and one byte short).
func TestScanFloatSixteenBytes(t *testing.T) {
	if !haveMantissa16 {
		t.Skip("mantissa16 does not run on this processor")
	}
	r := rand.New(rand.NewPCG(16, 2))
	inputs := append(adversarialDecimals(r), "01.5", "00", "0", "-0", "0.5", "-0.", "1.", ".5", "-.5", "1.5e3", "1.5E-3", "12345678901234.5",
		"123456789012345", "1234567890123456", "0.000000000000001", "9.99999999999999")
	const alphabet = "0123456789012345678901234567890123456789.-+eE x_"
	for range 200_000 {
		v := math.Exp(r.NormFloat64()*10) * float64(1-2*r.IntN(2))
		inputs = append(inputs, strconv.FormatFloat(v, 'f', r.IntN(14), 64), strconv.FormatFloat(v, 'g', 1+r.IntN(16), 64),
			strconv.FormatFloat(v, 'e', r.IntN(14), 64))
		b := make([]byte, 1+r.IntN(18))
		for i := range b {
			b[i] = alphabet[r.IntN(len(alphabet))]
		}
		inputs = append(inputs, string(b))
	}
	for _, s := range inputs {
		for _, tail := range []string{",1.5,2.5,3.5,4.5,5.5", "\n", "", "\r\n9999999999999999"} {
			b := []byte("#" + s + tail)
			for _, pad := range []int{0, 16 - len(b) + 1, 15 - len(b) + 1} { // the window of 16 bytes: past, at and short of the end
				bb := b
				if pad > 0 {
					bb = append(bytes.Clone(b), bytes.Repeat([]byte{'7'}, pad)...)
				}
				if d := scanBoth(bb, 1); d != "" {
					t.Fatal(d)
				}
			}
		}
	}
}

// FuzzScanFloatSixteenBytes: any bytes read at any offset, as a CSV cell
// and as a JSON number, answer the same with mantissa16 as one digit at a
// time.
func FuzzScanFloatSixteenBytes(f *testing.F) {
	for _, s := range []string{"57.12345678,1.5", "-0.000123456789012e5;", "1..2,3456789012345", ".5\n1234567890123456", "123456789012345.6x"} {
		f.Add([]byte(s), uint8(0))
	}
	f.Fuzz(func(t *testing.T, b []byte, at uint8) {
		if !haveMantissa16 || int(at) > len(b) {
			return
		}
		if d := scanBoth(b, int(at)); d != "" {
			t.Fatal(d)
		}
	})
}

package wire

import (
	"bytes"
	"math"
	"math/big"
	"math/rand/v2"
	"regexp"
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

// plainSyntax is the grammar parseFloat accepts, written independently of
// the scanner: -?D*(.D*)?([eE][+-]?D+)? with at least one mantissa digit.
var plainSyntax = regexp.MustCompile(`^-?([0-9]+\.?[0-9]*|\.[0-9]+)([eE][+-]?[0-9]+)?$`)

// strconvReference is what parseFloat must answer for s, from
// strconv.ParseFloat (the outside reference) and the documented refusals:
// syntax outside plainSyntax, overflow, and a nonzero mantissa that would
// read as 0 or a subnormal.
func strconvReference(s string) (float64, bool) {
	if !plainSyntax.MatchString(s) {
		return 0, false
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsInf(v, 0) {
		return 0, false
	}
	mant, _, _ := strings.Cut(strings.ToLower(s), "e")
	if math.Abs(v) < 0x1p-1022 && strings.ContainsAny(mant, "123456789") {
		return 0, false
	}
	return v, true
}

// adversarialDecimals are the hard cases for a fast path: halfway points
// around 2^53, 16 to 20 digits, powers of ten at the edges of the exact
// range (22, 22+15, -22), the ends of the double range, long runs of
// zeros, and syntax one byte away from valid.
func adversarialDecimals(r *rand.Rand) []string {
	out := []string{"9007199254740992", "9007199254740993", "9007199254740994", "9007199254740995",
		"900719925474099", "900719925474099.1", "90071992547409.91e1", "1e22", "1e23", "1e37", "1e38",
		"9007199254740991e22", "900719925474099e23", "90071992547409e24", "1e-22", "1e-23", "123456789e-30",
		"4.9406564584124654e-324", "2.2250738585072011e-308", "2.2250738585072014e-308", "1.7976931348623157e308",
		"1.7976931348623159e308", "0.0000000000000000000000000000000000001", "1000000000000000000000000000000",
		"-0", "-0.0e-999999", "0e99999", "00000000000000000000000001.5", "1.50000000000000000000000000",
		"1e", "1e+", "1e-", "-", ".", "-.", ".e1", "-.e1", "1..2", "1e1.5", "1e1e1", "--1", "-+1", "+1", "1-", "1 ", " 1"}
	digits := func(k int) string {
		b := make([]byte, k)
		for i := range b {
			b[i] = byte('0' + r.IntN(10))
		}
		return string(b)
	}
	for range 20000 {
		// 15 to 20 significant digits with a power of ten near the
		// fast path's limits.
		m := digits(15 + r.IntN(6))
		e := []int{-23, -22, -21, 21, 22, 23, 36, 37, 38, -308, 308}[r.IntN(11)]
		out = append(out, m+"e"+strconv.Itoa(e), m[:1]+"."+m[1:]+"e"+strconv.Itoa(e-len(m)+1), "-"+m[:8]+"."+m[8:])
		// Halfway between two doubles: the decimal of x + ulp/2 to 25 digits.
		x := math.Float64frombits(r.Uint64() &^ (1 << 63))
		if !math.IsInf(x, 0) && !math.IsNaN(x) {
			half := new(big.Float).SetPrec(200).SetFloat64(x)
			half.Add(half, new(big.Float).SetPrec(200).SetFloat64((math.Nextafter(x, math.Inf(1))-x)/2))
			out = append(out, half.Text('e', 25), half.Text('e', 16))
		}
	}
	return out
}

// TestScanFloatExact holds parseFloat and scanFloat to strconvReference
// bit for bit on millions of inputs: shortest and rounded forms of random
// doubles over the whole range, the adversarial cases, and random strings
// over the number alphabet; scanFloat must also stop exactly before a
// delimiter that follows a number.
func TestScanFloatExact(t *testing.T) {
	r := rand.New(rand.NewPCG(20, 1))
	n := 300_000
	if testing.Short() {
		n = 20_000
	}
	inputs := adversarialDecimals(r)
	const alphabet = "0123456789012345678901234567890123456789.-+eE x_"
	for range n {
		x := math.Float64frombits(r.Uint64())
		if !math.IsInf(x, 0) && !math.IsNaN(x) {
			inputs = append(inputs, strconv.FormatFloat(x, 'g', -1, 64), strconv.FormatFloat(x, 'e', r.IntN(20), 64))
		}
		v := math.Exp(r.NormFloat64()*10) * float64(1-2*r.IntN(2))
		inputs = append(inputs, strconv.FormatFloat(v, 'f', r.IntN(12), 64), strconv.FormatFloat(v, 'g', 1+r.IntN(12), 64))
		b := make([]byte, 1+r.IntN(12))
		for i := range b {
			b[i] = alphabet[r.IntN(len(alphabet))]
		}
		inputs = append(inputs, string(b))
	}
	bad := 0
	for _, s := range inputs {
		want, wok := strconvReference(s)
		got, ok := parseFloat([]byte(s))
		if ok != wok || (ok && math.Float64bits(got) != math.Float64bits(want)) {
			if bad++; bad <= 10 {
				t.Errorf("%q: parseFloat %v (%v), reference %v (%v)", s, got, ok, want, wok)
			}
			continue
		}
		if !ok {
			continue
		}
		for _, d := range []string{",", "\n", " ", ";", "\t"} {
			v, end, sok := scanFloat([]byte("#"+s+d+"9"), 1)
			if !sok || end != 1+len(s) || math.Float64bits(v) != math.Float64bits(want) {
				t.Fatalf("%q before %q: scanFloat %v, end %d, %v", s, d, v, end, sok)
			}
		}
	}
	t.Logf("%d inputs", len(inputs))
}

// FuzzParseFloat: any input, the same answer as strconvReference.
func FuzzParseFloat(f *testing.F) {
	for _, s := range []string{"1.5", "9007199254740993", "1e23", "-0.0e-400", "1e", "0x1p3", "2.2250738585072011e-308"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		want, wok := strconvReference(s)
		got, ok := parseFloat([]byte(s))
		if ok != wok || (ok && math.Float64bits(got) != math.Float64bits(want)) {
			t.Fatalf("%q: parseFloat %v (%v), reference %v (%v)", s, got, ok, want, wok)
		}
	})
}

// TestEightDigits: the word-at-a-time reading of eight bytes against
// strconv.ParseUint, on every byte pattern near the digits.
func TestEightDigits(t *testing.T) {
	r := rand.New(rand.NewPCG(8, 8))
	const near = "0123456789/:+-.eE \x00\xb0\xff"
	for range 1_000_000 {
		b := make([]byte, 8)
		for i := range b {
			if r.IntN(4) == 0 {
				b[i] = near[r.IntN(len(near))]
			} else {
				b[i] = byte('0' + r.IntN(10))
			}
		}
		want, err := strconv.ParseUint(string(b), 10, 64)
		got, ok := eightDigits(b)
		if ok != (err == nil) || (ok && got != want) {
			t.Fatalf("%q: %d, %v; strconv %d, %v", b, got, ok, want, err)
		}
	}
}

// BenchmarkScanFloat reads the numbers of a CSV body of x, y, sx, sy as
// instruments write them (ten significant digits, lengths varying from
// number to number), one core: ns/op is per number.
func BenchmarkScanFloat(b *testing.B) {
	body, _ := payloads(100_000)
	body = body[bytes.IndexByte(body, '\n')+1:]
	count := bytes.Count(body, []byte{'\n'}) * 4
	b.SetBytes(int64(len(body) / count))
	b.ResetTimer()
	for range b.N / count {
		var sum float64
		for i := 0; i < len(body); {
			v, end, ok := scanFloat(body, i)
			if !ok {
				b.Fatalf("at %d", i)
			}
			sum += v
			i = end + 1
		}
		if sum == 0 {
			b.Fatal("sum")
		}
	}
}

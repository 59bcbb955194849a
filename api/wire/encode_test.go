package wire

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"math"
	"math/rand/v2"
	"reflect"
	"testing"

	"eivfit/api/wire/wiretest"
	"eivfit/eiv/study"
)

// fill sets v (settable) to random contents: pointers and slices nil,
// empty or filled, floats across the ranges where encoding/json changes
// its format, strings with the characters it escapes. Depth bounds the
// recursion.
func fill(r *rand.Rand, v reflect.Value, depth int) {
	switch v.Kind() {
	case reflect.Pointer:
		if depth > 6 || r.IntN(3) == 0 {
			return
		}
		v.Set(reflect.New(v.Type().Elem()))
		fill(r, v.Elem(), depth+1)
	case reflect.Struct:
		for i := range v.NumField() {
			if v.Type().Field(i).IsExported() {
				fill(r, v.Field(i), depth+1)
			}
		}
	case reflect.Slice:
		switch r.IntN(4) {
		case 0:
			return // nil
		case 1:
			v.Set(reflect.MakeSlice(v.Type(), 0, 0))
		default:
			if depth > 6 {
				return
			}
			n := 1 + r.IntN(3)
			v.Set(reflect.MakeSlice(v.Type(), n, n))
			for i := range n {
				fill(r, v.Index(i), depth+1)
			}
		}
	case reflect.Float64:
		v.SetFloat(randomFloat(r))
	case reflect.Int:
		v.SetInt(int64(r.IntN(2000)) - 1000)
	case reflect.Uint64:
		v.SetUint(r.Uint64() >> r.IntN(64))
	case reflect.Bool:
		v.SetBool(r.IntN(2) == 0)
	case reflect.String:
		v.SetString(randomString(r))
	case reflect.Map:
		// Maps do not occur in a fit's answer; a new one fails the
		// comparison and is added here with its encoder.
	}
}

// randomFloat draws from the cases of encoding/json's number format:
// zero and negative zero, the 1e-6 and 1e21 cut-offs and their
// neighbours, exponents of one and two digits, ordinary values.
func randomFloat(r *rand.Rand) float64 {
	edges := []float64{0, math.Copysign(0, -1), 1e-6, math.Nextafter(1e-6, 0), 1e21, math.Nextafter(1e21, 0),
		1e-7, 1.5e-10, 5e-324, math.MaxFloat64, 1, -1, 0.1, 123456789.125, 1e20, 2.5e-300}
	switch r.IntN(4) {
	case 0:
		return edges[r.IntN(len(edges))] * float64(1-2*r.IntN(2))
	case 1:
		return math.Float64frombits(r.Uint64()&^(0x7ff<<52) | uint64(r.IntN(0x7ff))<<52) // any finite
	default:
		return r.NormFloat64() * math.Pow(10, float64(r.IntN(12)-6))
	}
}

func randomString(r *rand.Rand) string {
	parts := []string{"", "a", "york", `"`, `\`, "\n", "\t", "\b", "\f", "\r", "\x00", "\x1f", "\x7f", "<>&",
		"é", "σ", "\u2028", "\u2029", "\xff", "\xe2\x80", "😀", "/", " "}
	var b []byte
	for range r.IntN(6) {
		b = append(b, parts[r.IntN(len(parts))]...)
	}
	return string(b)
}

// referenceJSON is the answer as encoding/json writes it.
func referenceJSON(v any) ([]byte, error) {
	var b bytes.Buffer
	enc := json.NewEncoder(&b)
	enc.SetEscapeHTML(false)
	err := enc.Encode(v)
	return b.Bytes(), err
}

// TestFitEncoderMatchesEncodingJSON: the hand-written encoder of a fit's
// answer writes exactly the bytes encoding/json writes (the reference:
// Go's standard library), on random answers (seeded) and on the empty one.
func TestFitEncoderMatchesEncodingJSON(t *testing.T) {
	r := rand.New(rand.NewPCG(20, 1))
	cases := []struct {
		name string
		v    *FitResponse
	}{{"empty", &FitResponse{}}}
	for i := range 3000 {
		v := new(FitResponse)
		fill(r, reflect.ValueOf(v).Elem(), 0)
		cases = append(cases, struct {
			name string
			v    *FitResponse
		}{"random " + string(rune('a'+i%26)), v})
	}
	for i, c := range cases {
		want, err := referenceJSON(c.v)
		if err != nil {
			t.Fatalf("case %d (%s): encoding/json: %v", i, c.name, err)
		}
		got, err := Marshal(c.v)
		if err != nil {
			t.Fatalf("case %d (%s): %v", i, c.name, err)
		}
		if !bytes.Equal(got, want) {
			k := 0
			for k < min(len(got), len(want)) && got[k] == want[k] {
				k++
			}
			t.Fatalf("case %d (%s): differs at byte %d:\n got  …%s\n want …%s", i, c.name, k,
				got[max(0, k-80):min(len(got), k+80)], want[max(0, k-80):min(len(want), k+80)])
		}
	}
}

// FuzzFitEncoder: on answers drawn from the fuzzed seed, with the fuzzed
// string as a warning's message and a unit (any bytes, invalid UTF-8
// included), the hand-written encoder writes what encoding/json writes.
func FuzzFitEncoder(f *testing.F) {
	f.Add(uint64(1), "slope")
	f.Add(uint64(2), "\x00\u2028\xff\"<>&\\")
	f.Fuzz(func(t *testing.T, seed uint64, text string) {
		v := new(FitResponse)
		fill(rand.New(rand.NewPCG(seed, 2)), reflect.ValueOf(v).Elem(), 0)
		v.XUnit = text
		v.Warnings = append(v.Warnings, Warning{Code: "fuzz", Message: text})
		want, err := referenceJSON(v)
		if err != nil {
			t.Fatal(err)
		}
		got, err := Marshal(v)
		if err != nil || !bytes.Equal(got, want) {
			t.Fatalf("got %q, %v\nwant %q", got, err, want)
		}
	})
}

// TestFitEncoderRefusesNonFinite: a NaN or an infinity anywhere in a fit's
// answer is ErrNotFinite, as encoding/json refuses it.
func TestFitEncoderRefusesNonFinite(t *testing.T) {
	inf := math.Inf(-1)
	for _, c := range []struct {
		name string
		v    *FitResponse
	}{
		{"confidence NaN", &FitResponse{Confidence: math.NaN()}},
		{"slope +Inf", &FitResponse{Fits: Fits{York: &MethodFit{Slope: Param{Estimate: math.Inf(1)}}}}},
		{"chi2 -Inf", &FitResponse{Fits: Fits{OLS: &MethodFit{Chi2: &inf}}}},
		{"bias at NaN", &FitResponse{OLSBias: []OLSBias{{At: []BiasAt{{EIV: math.NaN()}}}}}},
	} {
		t.Run(c.name, func(t *testing.T) {
			if _, err := referenceJSON(c.v); err == nil {
				t.Fatal("encoding/json accepted it")
			}
			b, err := Marshal(c.v)
			if !errors.Is(err, ErrNotFinite) {
				t.Fatalf("got %q, %v; want ErrNotFinite", b, err)
			}
			if err := WriteJSON(&bytes.Buffer{}, c.v); !errors.Is(err, ErrNotFinite) {
				t.Fatalf("WriteJSON: %v; want ErrNotFinite", err)
			}
		})
	}
}

// BenchmarkEncodeFit encodes the answer of the small fit (n = 40; ols,
// deming, york) by the hand-written encoder and by encoding/json.
func BenchmarkEncodeFit(b *testing.B) {
	req, err := DecodeFitJSON(bytes.NewReader(wiretest.SmallFit()))
	if err != nil {
		b.Fatal(err)
	}
	res, err := study.Fit(context.Background(), req.Points.Data, req.Options(study.Settings{Limits: study.DefaultLimits}))
	if err != nil {
		b.Fatal(err)
	}
	v := req.Response(res)
	b.Run("direct", func(b *testing.B) {
		b.ReportAllocs()
		defer wiretest.ReportCPU(b, wiretest.CPUTime())
		for b.Loop() {
			e, err := Encode(v)
			if err != nil {
				b.Fatal(err)
			}
			e.Free()
		}
	})
	b.Run("encoding-json", func(b *testing.B) {
		b.ReportAllocs()
		defer wiretest.ReportCPU(b, wiretest.CPUTime())
		var buf bytes.Buffer
		for b.Loop() {
			buf.Reset()
			if err := encodeReflect(&buf, v); err != nil {
				b.Fatal(err)
			}
		}
	})
}

// TestFitEncoderRepeatedLevels: a confidence level the answer has written
// before is copied, not formatted again; on random answers whose levels
// repeat (drawn from a few values, −0 and 'e'-format numbers among them)
// the encoder still writes what encoding/json writes (the reference).
func TestFitEncoderRepeatedLevels(t *testing.T) {
	r := rand.New(rand.NewPCG(20, 2))
	levels := []float64{0.95, 0.9, 0, math.Copysign(0, -1), 1e-7, 0.95 + 1e-16}
	var setLevels func(v reflect.Value)
	setLevels = func(v reflect.Value) {
		switch v.Kind() {
		case reflect.Pointer:
			if !v.IsNil() {
				setLevels(v.Elem())
			}
		case reflect.Struct:
			for i := range v.NumField() {
				if f := v.Type().Field(i); f.Name == "Level" && f.Type.Kind() == reflect.Float64 {
					v.Field(i).SetFloat(levels[r.IntN(len(levels))])
				} else if f.IsExported() {
					setLevels(v.Field(i))
				}
			}
		case reflect.Slice:
			for i := range v.Len() {
				setLevels(v.Index(i))
			}
		}
	}
	for i := range 1000 {
		v := new(FitResponse)
		fill(r, reflect.ValueOf(v).Elem(), 0)
		setLevels(reflect.ValueOf(v).Elem())
		want, err := referenceJSON(v)
		if err != nil {
			t.Fatalf("case %d: encoding/json: %v", i, err)
		}
		got, err := Marshal(v)
		if err != nil {
			t.Fatalf("case %d: %v", i, err)
		}
		if !bytes.Equal(got, want) {
			t.Fatalf("case %d: got\n%s\nwant\n%s", i, got, want)
		}
	}
}

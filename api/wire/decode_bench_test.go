package wire

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"strconv"
	"testing"
)

// payloads makes a CSV and a JSON body of n points (x, y, sx, sy).
func payloads(n int) (csvBody, jsonBody []byte) {
	r := rand.New(rand.NewPCG(1, 2))
	var c, j bytes.Buffer
	c.WriteString("x,y,sx,sy\n")
	j.WriteString(`{"points":[`)
	for i := range n {
		x := 10 + 90*r.Float64()
		y := 2 + 1.1*x + r.NormFloat64()
		sx, sy := 0.5+r.Float64(), 0.5+r.Float64()
		f := func(v float64) string { return strconv.FormatFloat(v, 'g', 10, 64) }
		fmt.Fprintf(&c, "%s,%s,%s,%s\n", f(x), f(y), f(sx), f(sy))
		if i > 0 {
			j.WriteByte(',')
		}
		fmt.Fprintf(&j, `{"x":%s,"y":%s,"sx":%s,"sy":%s}`, f(x), f(y), f(sx), f(sy))
	}
	j.WriteString("]}")
	return c.Bytes(), j.Bytes()
}

func BenchmarkDecode(b *testing.B) {
	for _, n := range []int{1000, 1_000_000} {
		c, j := payloads(n)
		b.Run(fmt.Sprintf("csv/n=%d", n), func(b *testing.B) {
			b.ReportAllocs()
			b.SetBytes(int64(len(c)))
			for b.Loop() {
				d, err := DecodeCSV(bytes.NewReader(c))
				if err != nil || d.Len() != n {
					b.Fatal(err)
				}
			}
		})
		// csv-body is the CSV as the server and the command line hand it
		// over: a *Body read once, taken without a copy.
		b.Run(fmt.Sprintf("csv-body/n=%d", n), func(b *testing.B) {
			b.ReportAllocs()
			b.SetBytes(int64(len(c)))
			for b.Loop() {
				d, err := DecodeCSV(NewBody(c, nil))
				if err != nil || d.Len() != n {
					b.Fatal(err)
				}
			}
		})
		b.Run(fmt.Sprintf("json/n=%d", n), func(b *testing.B) {
			b.ReportAllocs()
			b.SetBytes(int64(len(j)))
			for b.Loop() {
				req, err := DecodeFitJSON(bytes.NewReader(j))
				if err != nil || req.Points.Len() != n {
					b.Fatal(err)
				}
			}
		})
	}
}

// BenchmarkDecodeStd is BenchmarkDecode's pair through the standard
// library (encoding/csv, encoding/json into plain structs), to keep the
// fast decoders' speed-up visible.
func BenchmarkDecodeStd(b *testing.B) {
	for _, n := range []int{1000, 1_000_000} {
		c, j := payloads(n)
		b.Run(fmt.Sprintf("csv/n=%d", n), func(b *testing.B) {
			b.ReportAllocs()
			b.SetBytes(int64(len(c)))
			for b.Loop() {
				d, err := decodeCSVReader(c, 0, nil)
				if err != nil || d.Len() != n {
					b.Fatal(err)
				}
			}
		})
		b.Run(fmt.Sprintf("json/n=%d", n), func(b *testing.B) {
			b.ReportAllocs()
			b.SetBytes(int64(len(j)))
			for b.Loop() {
				var req plainRequest
				dec := json.NewDecoder(bytes.NewReader(j))
				dec.DisallowUnknownFields()
				if err := dec.Decode(&req); err != nil || len(req.Points) != n {
					b.Fatal(err)
				}
			}
		})
	}
}

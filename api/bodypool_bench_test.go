package api

import (
	"bytes"
	"fmt"
	"io"
	"net/http/httptest"
	"strings"
	"testing"

	"eivfit/api/wire/wiretest"
)

// smallFitCSV is wiretest.SmallFit's points as a CSV body (x, y, sx, sy),
// which POST /v1/fit decodes while it arrives (serveStream).
func smallFitCSV() []byte {
	var b strings.Builder
	b.WriteString("x,y,sx,sy\n")
	for _, p := range bytes.Split(wiretest.SmallFit(), []byte(`{"x":`))[1:] {
		var x, y, sx, sy float64
		if _, err := fmt.Sscanf(string(p), `%g,"y":%g,"sx":%g,"sy":%g}`, &x, &y, &sx, &sy); err != nil {
			panic(err)
		}
		fmt.Fprintf(&b, "%g,%g,%g,%g\n", x, y, sx, sy)
	}
	return []byte(b.String())
}

// BenchmarkSmallFitBodies is the small fit (n = 40; ols, deming, york)
// through the real router in process, as the body arrives: JSON with its
// length declared and chunked (no length), and the same points as a CSV
// (streamed), declared and chunked. It measures what a request's body
// costs the server (its buffers), beside BenchmarkSmallFit.
func BenchmarkSmallFitBodies(b *testing.B) {
	srv, err := NewServer(Config{})
	if err != nil {
		b.Fatal(err)
	}
	h := srv.Handler()
	for _, c := range []struct {
		name, path, ctype string
		body              []byte
		chunked           bool
	}{
		{"json", "/v1/fit", "application/json", wiretest.SmallFit(), false},
		{"json-chunked", "/v1/fit", "application/json", wiretest.SmallFit(), true},
		{"csv", "/v1/fit?methods=ols,deming,york", "text/csv", smallFitCSV(), false},
		{"csv-chunked", "/v1/fit?methods=ols,deming,york", "text/csv", smallFitCSV(), true},
		// Larger bodies, within and at the top of the pool's classes
		// (about 100 KB and 1 MB of JSON; 45 KB and 450 KB of CSV).
		{"json-n=2000", "/v1/fit", "application/json", []byte(poolPoints(2000, false) + `,"methods":["ols"]}`), false},
		{"json-n=20000", "/v1/fit", "application/json", []byte(poolPoints(20000, false) + `,"methods":["ols"]}`), false},
		{"csv-n=2000", "/v1/fit?methods=ols", "text/csv", []byte(poolPoints(2000, true)), false},
		{"csv-n=20000", "/v1/fit?methods=ols", "text/csv", []byte(poolPoints(20000, true)), false},
	} {
		b.Run(c.name, func(b *testing.B) {
			b.ReportAllocs()
			defer reportCPUSince(b)()
			for b.Loop() {
				var r io.Reader = bytes.NewReader(c.body)
				if c.chunked {
					r = io.MultiReader(r)
				}
				req := httptest.NewRequest("POST", c.path, r)
				if c.chunked {
					req.ContentLength = -1
				}
				req.Header.Set("Content-Type", c.ctype)
				rec := httptest.NewRecorder()
				h.ServeHTTP(rec, req)
				if rec.Code != 200 {
					b.Fatalf("%d %s", rec.Code, rec.Body)
				}
			}
		})
	}
}

// reportCPUSince starts the CPU clock of a benchmark; the function it
// returns reports cpu-ns/op.
func reportCPUSince(b *testing.B) func() {
	start := wiretest.CPUTime()
	return func() { wiretest.ReportCPU(b, start) }
}

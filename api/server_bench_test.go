package api

import (
	"bytes"
	"fmt"
	"math/rand/v2"
	"net/http/httptest"
	"strings"
	"testing"
)

// BenchmarkSmallFit is one small request (n = 40; ols, deming, york)
// through the real router, in process: the server's own cost per request.
func BenchmarkSmallFit(b *testing.B) {
	srv, err := NewServer(Config{})
	if err != nil {
		b.Fatal(err)
	}
	r := rand.New(rand.NewPCG(5, 5))
	var pts []string
	for range 40 {
		t := 5 + 20*r.Float64()
		pts = append(pts, fmt.Sprintf(`{"x":%.4f,"y":%.4f,"sx":0.2,"sy":0.25}`, t+0.2*r.NormFloat64(), 0.1+1.03*t+0.25*r.NormFloat64()))
	}
	body := []byte(`{"points":[` + strings.Join(pts, ",") + `],"methods":["ols","deming","york"]}`)
	h := srv.Handler()
	b.ReportAllocs()
	for b.Loop() {
		req := httptest.NewRequest("POST", "/v1/fit", bytes.NewReader(body))
		req.Header.Set("Content-Type", "application/json")
		rec := httptest.NewRecorder()
		h.ServeHTTP(rec, req)
		if rec.Code != 200 {
			b.Fatal(rec.Code)
		}
	}
}

package api

import (
	"bytes"
	"net/http/httptest"
	"testing"

	"eivfit/api/wire/wiretest"
)

// BenchmarkSmallFit is one small request (n = 40; ols, deming, york)
// through the real router, in process: the server's own cost per request.
func BenchmarkSmallFit(b *testing.B) {
	srv, err := NewServer(Config{})
	if err != nil {
		b.Fatal(err)
	}
	body := wiretest.SmallFit()
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

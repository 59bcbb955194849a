package api

import (
	"context"
	"net/http/httptest"
	"strings"
	"testing"
	"time"

	"eivfit/api/store"
	"eivfit/eiv/study"
)

// BenchmarkSaveOverhead: the same small CSV fit without and with
// save=true on SQLite in a temporary directory; the difference is what
// saving adds (target ≤ 2 ms). Compare the two in one run.
func BenchmarkSaveOverhead(b *testing.B) {
	dir := b.TempDir()
	srv, err := NewServer(Config{OpenStore: func(ctx context.Context, observe func(string, time.Duration, error)) (study.Store, error) {
		return store.Open(ctx, store.Config{DataDir: dir, Observe: observe})
	}})
	if err != nil {
		b.Fatal(err)
	}
	defer srv.Close()
	for _, c := range []struct{ name, target string }{{"plain", "/v1/fit?methods=ols,deming"}, {"save", "/v1/fit?methods=ols,deming&save=true"}} {
		b.Run(c.name, func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				req := httptest.NewRequest("POST", c.target, strings.NewReader(savedFitCSV))
				req.Header.Set("Content-Type", "text/csv")
				rec := httptest.NewRecorder()
				srv.Handler().ServeHTTP(rec, req)
				if rec.Code != 200 && rec.Code != 201 {
					b.Fatal(rec.Code, rec.Body)
				}
			}
		})
	}
}

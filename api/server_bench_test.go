package api

import (
	"bytes"
	"context"
	"io"
	"net"
	"net/http"
	"net/http/httptest"
	"testing"

	"eivfit/api/wire/wiretest"
)

// BenchmarkSmallFit is one small request (n = 40; ols, deming, york)
// through the real router, in process: the server's own cost per request
// without the network.
func BenchmarkSmallFit(b *testing.B) {
	srv, err := NewServer(Config{})
	if err != nil {
		b.Fatal(err)
	}
	body := wiretest.SmallFit()
	h := srv.Handler()
	b.ReportAllocs()
	defer wiretest.ReportCPU(b, wiretest.CPUTime())
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

// BenchmarkServerSmallFitLoopback sends the same small fit over loopback
// TCP on keep-alive connections (four at a time) to a server listening
// in process: what net/http adds (parsing, the body read under its
// deadlines, the answer's write). The client runs in the same process, so
// compare builds with each other, not with BenchmarkSmallFit.
func BenchmarkServerSmallFitLoopback(b *testing.B) {
	srv, err := NewServer(Config{})
	if err != nil {
		b.Fatal(err)
	}
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		b.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	go srv.Serve(ctx, ln, nil)
	url := "http://" + ln.Addr().String() + "/v1/fit"
	client := &http.Client{Transport: &http.Transport{MaxIdleConnsPerHost: 16, DisableCompression: true}}
	body := wiretest.SmallFit()
	b.ReportAllocs()
	b.SetParallelism(2) // four goroutines on two cores
	defer wiretest.ReportCPU(b, wiretest.CPUTime())
	b.RunParallel(func(pb *testing.PB) {
		for pb.Next() {
			resp, err := client.Post(url, "application/json", bytes.NewReader(body))
			if err != nil {
				b.Error(err)
				return
			}
			_, _ = io.Copy(io.Discard, resp.Body)
			resp.Body.Close()
			if resp.StatusCode != 200 {
				b.Errorf("status %d", resp.StatusCode)
				return
			}
		}
	})
}

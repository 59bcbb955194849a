package main

import (
	"fmt"
	"io"
	"net"
	"net/http"
	"net/http/httptest"
	"strings"
	"sync/atomic"
	"testing"
)

// TestRawPoster: the load generator's own HTTP/1.1 client reads answers
// framed by Content-Length, chunked (with trailers) and ended by
// Connection: close, reuses a kept-alive connection, dials anew after a
// close, and reports a failed connection as -1.
func TestRawPoster(t *testing.T) {
	var conns atomic.Int32
	srv := httptest.NewUnstartedServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		b, _ := io.ReadAll(r.Body)
		if string(b) != `{"x":1}` || r.Header.Get("Content-Type") != "application/json" || r.URL.Path != "/v1/fit" {
			w.WriteHeader(400)
			return
		}
		switch r.URL.Query().Get("frame") {
		case "chunked":
			w.Header().Set("Trailer", "X-End")
			w.WriteHeader(201)
			for range 3 {
				fmt.Fprint(w, strings.Repeat("a", 3000))
				w.(http.Flusher).Flush()
			}
			w.Header().Set("X-End", "1")
		case "close":
			w.Header().Set("Connection", "close")
			w.WriteHeader(503)
			fmt.Fprint(w, "busy")
		default:
			w.Header().Set("Content-Length", "5")
			fmt.Fprint(w, "hello")
		}
	}))
	srv.Config.ConnState = func(_ net.Conn, s http.ConnState) {
		if s == http.StateNew {
			conns.Add(1)
		}
	}
	srv.Start()
	defer srv.Close()
	addr := strings.TrimPrefix(srv.URL, "http://")
	for _, c := range []struct {
		name, path string
		want       []int
		wantConns  int32
	}{
		{"content-length, kept alive", "/v1/fit", []int{200, 200, 200}, 1},
		{"chunked with trailers, kept alive", "/v1/fit?frame=chunked", []int{201, 201}, 1},
		{"connection close, dialled anew", "/v1/fit?frame=close", []int{503, 503}, 2},
		{"empty 400 answer, connection kept", "/other", []int{400, 400}, 1},
	} {
		t.Run(c.name, func(t *testing.T) {
			conns.Store(0)
			p := newRawPoster(addr, c.path, "application/json", []byte(`{"x":1}`))
			defer p.close()
			for i, want := range c.want {
				if got := p.do(); got != want {
					t.Fatalf("request %d: status %d, want %d", i, got, want)
				}
			}
			if got := conns.Load(); got != c.wantConns {
				t.Errorf("%d connections, want %d", got, c.wantConns)
			}
		})
	}
	t.Run("no server", func(t *testing.T) {
		p := newRawPoster("127.0.0.1:1", "/v1/fit", "application/json", nil)
		if got := p.do(); got != -1 {
			t.Errorf("status %d, want -1", got)
		}
	})
}

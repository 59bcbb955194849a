package api

import (
	"bytes"
	"context"
	"fmt"
	"log/slog"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"
)

func heavyBody(n, resamples int) string {
	var b strings.Builder
	b.WriteString(`{"points":[`)
	for i := range n {
		if i > 0 {
			b.WriteByte(',')
		}
		fmt.Fprintf(&b, `{"x":%d,"y":%g,"sx":1,"sy":1,"id":"PATIENT-%d"}`, i, 2*float64(i)+float64(i%7), i)
	}
	fmt.Fprintf(&b, `],"methods":["york"],"bootstrap":{"resamples":%d,"seed":1}}`, resamples)
	return b.String()
}

// On shutdown the server drains: requests in flight complete with 200,
// /readyz reports draining, new connections are refused, and Serve returns
// nil. Nothing the client sent reaches the log.
func TestDrainAndLogs(t *testing.T) {
	var logs bytes.Buffer
	var mu sync.Mutex
	logger := slog.New(slog.NewJSONHandler(&lockedWriter{w: &logs, mu: &mu}, nil))
	srv, err := NewServer(Config{Slots: 2, ShutdownTimeout: 30 * time.Second, Logger: logger})
	if err != nil {
		t.Fatal(err)
	}
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	base := "http://" + ln.Addr().String()
	ctx, cancel := context.WithCancel(context.Background())
	served := make(chan error, 1)
	go func() { served <- srv.Serve(ctx, ln, nil) }()

	body := heavyBody(200, 20000) // a few hundred ms of bootstrap
	results := make(chan int, 2)
	for range 2 {
		go func() {
			resp, err := http.Post(base+"/v1/fit", "application/json", strings.NewReader(body))
			if err != nil {
				results <- -1
				return
			}
			resp.Body.Close()
			results <- resp.StatusCode
		}()
	}
	// Wait until both are computing, then shut down.
	deadline := time.Now().Add(5 * time.Second)
	for len(srv.slots) < 2 && time.Now().Before(deadline) {
		time.Sleep(time.Millisecond)
	}
	if len(srv.slots) < 2 {
		t.Fatal("requests did not start")
	}
	cancel()
	// New connections must soon be refused, while the two requests still run.
	refused := false
	for deadline := time.Now().Add(3 * time.Second); time.Now().Before(deadline); time.Sleep(10 * time.Millisecond) {
		resp, err := http.Get(base + "/healthz")
		if err != nil {
			refused = true
			break
		}
		resp.Body.Close()
	}
	if !refused || !srv.draining.Load() {
		t.Error("new connections were still accepted 3 s after the shutdown began")
	}
	for range 2 {
		if code := <-results; code != 200 {
			t.Errorf("in-flight request ended with %d", code)
		}
	}
	if err := <-served; err != nil {
		t.Errorf("Serve: %v", err)
	}
	mu.Lock()
	defer mu.Unlock()
	if strings.Contains(logs.String(), "PATIENT-") || strings.Contains(logs.String(), `"x"`) {
		t.Errorf("request data in the log:\n%s", logs.String())
	}
	if !strings.Contains(logs.String(), `"route":"/v1/fit"`) || !strings.Contains(logs.String(), `"request_id"`) {
		t.Errorf("log lacks route or request id:\n%s", logs.String())
	}
}

type lockedWriter struct {
	w  *bytes.Buffer
	mu *sync.Mutex
}

func (l *lockedWriter) Write(p []byte) (int, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.w.Write(p)
}

// The embedded demo files are the ones in testdata.
func TestDemoFilesMatchTestdata(t *testing.T) {
	files, _ := filepath.Glob("../testdata/demo-*.csv")
	if len(files) < 3 {
		t.Fatalf("demo files: %v", files)
	}
	for _, f := range files {
		f = filepath.Base(f)
		want, err := os.ReadFile("../testdata/" + f)
		if err != nil {
			t.Fatal(err)
		}
		got, err := Demo.ReadFile("demo/" + f)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(got, want) {
			t.Errorf("api/demo/%s differs from testdata/%s: copy it again", f, f)
		}
	}
}

// newTCPServer serves h on a loopback port for the length of the test.
func newTCPServer(t *testing.T, h http.Handler) string {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	srv := &http.Server{Handler: h, ReadHeaderTimeout: 5 * time.Second}
	go srv.Serve(ln)
	t.Cleanup(func() { srv.Close() })
	return "http://" + ln.Addr().String()
}

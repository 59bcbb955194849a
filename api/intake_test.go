package api

import (
	"bufio"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"net"
	"net/http"
	"strings"
	"testing"
	"time"

	"eivfit/api/wire"
)

// serveTCP runs a server with its own http.Server settings on a free
// loopback port.
func serveTCP(t *testing.T, cfg Config) (*Server, string) {
	t.Helper()
	srv, err := NewServer(cfg)
	if err != nil {
		t.Fatal(err)
	}
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	t.Cleanup(cancel)
	go srv.Serve(ctx, ln, nil)
	return srv, ln.Addr().String()
}

// rawRequest writes head (and part of a body) on a new connection and
// returns the status line and the answer's body, read within wait.
func rawRequest(t *testing.T, addr, head string, wait time.Duration) (status, body string, took time.Duration) {
	t.Helper()
	conn, err := net.Dial("tcp", addr)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	start := time.Now()
	if _, err := io.WriteString(conn, head); err != nil {
		t.Fatal(err)
	}
	_ = conn.SetReadDeadline(time.Now().Add(wait))
	resp, err := http.ReadResponse(bufio.NewReader(conn), nil)
	if err != nil {
		return "", "", time.Since(start)
	}
	b, _ := io.ReadAll(resp.Body)
	resp.Body.Close()
	return resp.Status, string(b), time.Since(start)
}

// A body that stalls is answered 408 (problem+json) when the body idle
// timeout passes, and holds no compute slot meanwhile.
func TestStalledBody408(t *testing.T) {
	srv, addr := serveTCP(t, Config{BodyIdleTimeout: 300 * time.Millisecond, Slots: 1})
	status, body, took := rawRequest(t, addr, "POST /v1/fit HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\nContent-Length: 1000\r\n\r\n{\"points\":", 5*time.Second)
	if !strings.HasPrefix(status, "408") || !strings.Contains(body, "body-timeout") {
		t.Errorf("answer %q %s, want 408 body-timeout", status, body)
	}
	if took > 3*time.Second {
		t.Errorf("answered after %v", took)
	}
	if len(srv.slots) != 0 || srv.intake.available() != srv.intake.cap {
		t.Errorf("slots %d, body budget %d of %d free after the timeout", len(srv.slots), srv.intake.available(), srv.intake.cap)
	}
}

// When the body budget is full the 503 says so (not "compute slots"), and
// /readyz reports it; bytes are charged as they arrive, so a declared
// length alone takes nothing.
func TestBodyBudgetFull(t *testing.T) {
	const limit = 1 << 20
	srv, addr := serveTCP(t, Config{MaxBodyBytes: limit, MaxInFlightBytes: limit, SlotWait: 200 * time.Millisecond, BodyIdleTimeout: 3 * time.Second})
	// Declared but unsent: nothing is charged beyond one step.
	conn, err := net.Dial("tcp", addr)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	fmt.Fprintf(conn, "POST /v1/fit HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\nContent-Length: %d\r\n\r\n", limit)
	time.Sleep(100 * time.Millisecond)
	if used := srv.intake.cap - srv.intake.available(); used > bodyChunk {
		t.Errorf("an idle upload holds %d bytes of the budget, want ≤ %d", used, bodyChunk)
	}
	// Sending most of it fills the budget.
	if _, err := conn.Write([]byte(strings.Repeat(" ", limit-bodyChunk/2))); err != nil {
		t.Fatal(err)
	}
	time.Sleep(200 * time.Millisecond)
	resp, err := http.Post("http://"+addr+"/v1/fit", "application/json", strings.NewReader(`{"points":[]}`))
	if err != nil {
		t.Fatal(err)
	}
	var p wire.Problem
	_ = json.NewDecoder(resp.Body).Decode(&p)
	resp.Body.Close()
	if resp.StatusCode != 503 || p.Type != wire.ProblemTypeBase+"body-budget-full" || resp.Header.Get("Retry-After") == "" {
		t.Errorf("small fit with the budget full: %d %+v", resp.StatusCode, p)
	}
	resp, err = http.Get("http://" + addr + "/readyz")
	if err != nil {
		t.Fatal(err)
	}
	b, _ := io.ReadAll(resp.Body)
	resp.Body.Close()
	if resp.StatusCode != 503 || !strings.Contains(string(b), "body budget full") {
		t.Errorf("/readyz with the budget full: %d %s", resp.StatusCode, b)
	}
}

// With API keys set, a request without a valid key is answered 401 before
// any byte of its body is read, on /v1/* and on POST /report alike.
func TestKeyCheckedBeforeBody(t *testing.T) {
	srv, addr := serveTCP(t, Config{APIKeys: []string{"k1"}, BodyIdleTimeout: 10 * time.Second})
	for _, c := range []struct{ name, path, ctype, auth, want string }{
		{"fit without key", "/v1/fit", "application/json", "", "401"},
		{"fit with wrong key", "/v1/fit", "application/json", "Authorization: Bearer nope\r\n", "401"},
		{"report without key", "/report", "multipart/form-data; boundary=x", "", "401"},
		{"report with wrong password", "/report", "multipart/form-data; boundary=x", "Authorization: Basic dTpub3Bl\r\n", "401"},
	} {
		t.Run(c.name, func(t *testing.T) {
			head := fmt.Sprintf("POST %s HTTP/1.1\r\nHost: x\r\nContent-Type: %s\r\n%sContent-Length: %d\r\n\r\n", c.path, c.ctype, c.auth, 60<<20)
			status, _, took := rawRequest(t, addr, head, 3*time.Second)
			if !strings.HasPrefix(status, c.want) {
				t.Errorf("status %q, want %s", status, c.want)
			}
			if took > time.Second {
				t.Errorf("answered after %v: the body was waited for", took)
			}
			if used := srv.intake.cap - srv.intake.available(); used != 0 {
				t.Errorf("%d bytes of the body budget held", used)
			}
		})
	}
}

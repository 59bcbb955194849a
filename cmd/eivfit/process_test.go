package main

import (
	"bufio"
	"bytes"
	"io"
	"net/http"
	"os"
	"os/exec"
	"strings"
	"sync"
	"testing"
	"time"
)

// syncBuffer collects a process's stderr while it runs.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// serveProcess is `eivfit serve` running as a process of its own (the test
// binary standing in for eivfit, see TestMain).
type serveProcess struct {
	cmd    *exec.Cmd
	base   string
	stderr *syncBuffer
	done   chan error
}

// startServe starts `eivfit serve --addr 127.0.0.1:0 ARGS` with the extra
// environment env and waits until it listens; the process is killed at
// the end of the test, and its log shown if the test failed.
func startServe(t *testing.T, env []string, args ...string) *serveProcess {
	t.Helper()
	cmd := exec.Command(os.Args[0], append([]string{"serve", "--addr", "127.0.0.1:0", "--log-level", "warn"}, args...)...)
	cmd.Env = append(append(os.Environ(), "EIVFIT_TEST_AS_BINARY=1"), env...)
	p := &serveProcess{cmd: cmd, stderr: &syncBuffer{}, done: make(chan error, 1)}
	cmd.Stderr = p.stderr
	out, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		p.kill()
		if t.Failed() {
			t.Logf("server log:\n%s", p.stderr.String())
		}
	})
	lines := make(chan string)
	go func() {
		sc := bufio.NewScanner(out)
		for sc.Scan() {
			if _, u, ok := strings.Cut(sc.Text(), " listening on "); ok {
				lines <- u
			}
		}
		close(lines)
		io.Copy(io.Discard, out)
	}()
	go func() { p.done <- cmd.Wait() }()
	select {
	case u, ok := <-lines:
		if !ok {
			t.Fatalf("the server exited before listening:\n%s", p.stderr.String())
		}
		p.base = u
	case <-time.After(20 * time.Second):
		t.Fatalf("the server did not listen within 20 s:\n%s", p.stderr.String())
	}
	return p
}

// kill ends the process with SIGKILL and waits for it.
func (p *serveProcess) kill() {
	if p.cmd.Process == nil {
		return
	}
	p.cmd.Process.Kill()
	select {
	case <-p.done:
		p.done <- nil // a later kill returns at once
	case <-time.After(10 * time.Second):
	}
}

// do sends a request and returns the status, the headers and the body;
// a transport error is status -1.
func do(t *testing.T, method, url, contentType, accept string, body []byte) (int, http.Header, []byte) {
	t.Helper()
	req, err := http.NewRequest(method, url, bytes.NewReader(body))
	if err != nil {
		t.Fatal(err)
	}
	if contentType != "" {
		req.Header.Set("Content-Type", contentType)
	}
	if accept != "" {
		req.Header.Set("Accept", accept)
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		return -1, nil, []byte(err.Error())
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	if err != nil {
		return -1, nil, []byte(err.Error())
	}
	return resp.StatusCode, resp.Header, b
}

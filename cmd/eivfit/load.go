package main

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"math/rand/v2"
	"net"
	"net/http"
	"os"
	"os/exec"
	"strconv"
	"strings"
	"sync"
	"time"

	"eivfit/api/wire/wiretest"
)

const loadUsage = `Usage: eivfit load [flags]

Load-tests a server on 127.0.0.1 (by default one it starts as a child
process): sustained small fits (n = 40; ols, deming, york) sent open-loop at
--rate for --duration, then prints throughput, latency quantiles and errors,
and exits 1 on any error. The small fits go out on plain keep-alive
HTTP/1.1 connections written and read directly (no HTTP client library),
so that the load generator takes little of the machine it measures. With --saturate N it instead sends N concurrent
maximum-size requests (about 60 MB of JSON each) and reports their statuses
and the server's peak resident memory, then two fault cases: four idle
uploads that declare 64 MiB and send nothing (the latency of a small fit
meanwhile, and their answers), and giant lists (a 60 MB body holding
millions of "at" values, decision levels or empty datasets: status, time
and the peak memory after each). Bounded in count and time; never sends
anywhere but loopback.

Flags:
`

func runLoad(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("load", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.Usage = func() { fmt.Fprint(stderr, loadUsage); fs.PrintDefaults() }
	dur := fs.Duration("duration", 60*time.Second, "how long to send")
	rate := fs.Float64("rate", 4000, "requests per second")
	port := fs.Int("port", 0, "load a server already listening on 127.0.0.1:PORT instead of starting one")
	saturate := fs.Int("saturate", 0, "send this many concurrent maximum-size requests instead")
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return nil
		}
		return exitError{2}
	}
	if *dur > 10*time.Minute || *rate > 50000 || *saturate > 256 {
		fmt.Fprintln(stderr, "eivfit load: stay within 10 minutes, 50,000 requests/s and 256 concurrent requests")
		return exitError{2}
	}
	base := fmt.Sprintf("http://127.0.0.1:%d", *port)
	var child *exec.Cmd
	if *port == 0 {
		var err error
		if base, child, err = startServer(ctx); err != nil {
			return err
		}
		defer stopServer(child)
	}
	tr := &http.Transport{MaxIdleConnsPerHost: 256, DisableCompression: true}
	client := &http.Client{Transport: tr, Timeout: 120 * time.Second}
	if *saturate > 0 {
		return saturateRun(stdout, client, base, *saturate, child)
	}
	post := newRawPoster(strings.TrimPrefix(base, "http://"), "/v1/fit", "application/json", wiretest.SmallFit())
	defer post.close()
	var mu sync.Mutex
	codes := map[int]int{}
	one := func() bool {
		code := post.do()
		mu.Lock()
		codes[code]++
		mu.Unlock()
		return code == 200
	}
	start := time.Now()
	if err := benchLatency(stdout, one, *rate, *dur); err != nil {
		return err
	}
	total, bad := 0, 0
	for c, k := range codes {
		total += k
		if c != 200 {
			bad += k
		}
	}
	fmt.Fprintf(stdout, "  %d requests in %v: %.0f requests/s; %d errors %v\n", total, time.Since(start).Round(time.Millisecond),
		float64(total)/time.Since(start).Seconds(), bad, codes)
	if bad > 0 {
		return exitError{1}
	}
	return nil
}

// saturateRun sends n concurrent maximum-size requests.
func saturateRun(stdout io.Writer, client *http.Client, base string, n int, child *exec.Cmd) error {
	const points = 880_000 // about 60 MB of JSON, under the default 64 MiB limit
	var b bytes.Buffer
	b.Grow(70 << 20)
	b.WriteString(`{"points":[`)
	r := rand.New(rand.NewPCG(9, 9))
	for i := range points {
		if i > 0 {
			b.WriteByte(',')
		}
		t := 10 + 90*r.Float64()
		fmt.Fprintf(&b, `{"x":%.6f,"y":%.6f,"sx":0.5,"sy":0.7}`, t+0.5*r.NormFloat64(), 2+1.1*t+0.7*r.NormFloat64())
	}
	b.WriteString(`],"methods":["ols","deming"]}`)
	body := b.Bytes()
	var wg sync.WaitGroup
	codes := make([]int, n)
	retry := make([]string, n)
	took := make([]time.Duration, n)
	for i := range n {
		wg.Add(1)
		go func() {
			defer wg.Done()
			t0 := time.Now()
			resp, err := client.Post(base+"/v1/fit", "application/json", bytes.NewReader(body))
			if err != nil {
				codes[i] = -1
				return
			}
			_, _ = io.Copy(io.Discard, resp.Body)
			resp.Body.Close()
			codes[i], retry[i], took[i] = resp.StatusCode, resp.Header.Get("Retry-After"), time.Since(t0)
		}()
	}
	wg.Wait()
	count := map[string]int{}
	var slowest time.Duration
	for i, c := range codes {
		k := strconv.Itoa(c)
		if c == 503 && retry[i] != "" {
			k += " with Retry-After"
		}
		count[k]++
		slowest = max(slowest, took[i])
	}
	fmt.Fprintf(stdout, "%d concurrent requests of %.1f MB (%d points): %v; slowest %v\n", n, float64(len(body))/1e6, points, count, slowest.Round(time.Millisecond))
	printMemory(stdout, child)
	if err := idleUploads(stdout, client, base); err != nil {
		return err
	}
	giantLists(stdout, client, base, child)
	return nil
}

// printMemory prints the child server's resident and peak resident memory.
func printMemory(stdout io.Writer, child *exec.Cmd) {
	if child == nil {
		return
	}
	if st, err := os.ReadFile(fmt.Sprintf("/proc/%d/status", child.Process.Pid)); err == nil {
		for _, l := range strings.Split(string(st), "\n") {
			if strings.HasPrefix(l, "VmHWM:") || strings.HasPrefix(l, "VmRSS:") {
				fmt.Fprintf(stdout, "  server %s\n", strings.Join(strings.Fields(l), " "))
			}
		}
	}
}

// idleUploads opens four uploads that declare 64 MiB and send nothing,
// times small fits meanwhile, and reports how the uploads were answered.
func idleUploads(stdout io.Writer, client *http.Client, base string) error {
	body := wiretest.SmallFit()
	fitTime := func() (time.Duration, int) {
		t0 := time.Now()
		resp, err := client.Post(base+"/v1/fit", "application/json", bytes.NewReader(body))
		if err != nil {
			return time.Since(t0), -1
		}
		_, _ = io.Copy(io.Discard, resp.Body)
		resp.Body.Close()
		return time.Since(t0), resp.StatusCode
	}
	best := func() (time.Duration, map[int]int) {
		d, codes := time.Hour, map[int]int{}
		for range 20 {
			t, c := fitTime()
			d = min(d, t)
			codes[c]++
		}
		return d, codes
	}
	unloaded, _ := best()
	uploads, err := openIdleConns(strings.TrimPrefix(base, "http://"), 4, 90*time.Second)
	if err != nil {
		return err
	}
	defer uploads.close()
	time.Sleep(200 * time.Millisecond)
	loaded, codes := best()
	answers, took := uploads.wait()
	fmt.Fprintf(stdout, "four idle 64 MiB uploads: small fit %v (unloaded %v), statuses %v; the uploads answered %q after %v\n",
		loaded.Round(time.Microsecond), unloaded.Round(time.Microsecond), codes, answers[0], took[0].Round(time.Millisecond))
	return nil
}

// idleConns are connections that each sent the head of a POST /v1/fit
// declaring a 64 MiB body and then nothing, each reading its status line.
type idleConns struct {
	conns   []net.Conn
	wg      sync.WaitGroup
	answers []string        // the status lines, trimmed
	took    []time.Duration // when each came, from the opening
}

// openIdleConns opens n idle uploads to addr (host:port), each waiting
// at most timeout for its answer; on an error those opened are closed.
func openIdleConns(addr string, n int, timeout time.Duration) (*idleConns, error) {
	u := &idleConns{answers: make([]string, n), took: make([]time.Duration, n)}
	t0 := time.Now()
	for i := range n {
		conn, err := net.Dial("tcp", addr)
		if err != nil {
			u.close()
			return nil, err
		}
		u.conns = append(u.conns, conn)
		fmt.Fprintf(conn, "POST /v1/fit HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\nContent-Length: %d\r\n\r\n", 64<<20)
		u.wg.Add(1)
		go func() {
			defer u.wg.Done()
			_ = conn.SetReadDeadline(time.Now().Add(timeout))
			line, _ := bufio.NewReader(conn).ReadString('\n')
			u.answers[i], u.took[i] = strings.TrimSpace(line), time.Since(t0)
		}()
	}
	return u, nil
}

// wait returns the status lines and their times once every upload has one
// (or has timed out).
func (u *idleConns) wait() ([]string, []time.Duration) {
	u.wg.Wait()
	return u.answers, u.took
}

func (u *idleConns) close() {
	for _, c := range u.conns {
		c.Close()
	}
}

// giantLists sends bodies of about 60 MB that hold one giant list each.
func giantLists(stdout io.Writer, client *http.Client, base string, child *exec.Cmd) {
	const size = 60 << 20
	list := func(prefix, elem, suffix string) []byte {
		var b bytes.Buffer
		b.Grow(size)
		b.WriteString(prefix)
		for b.Len()+2*len(elem)+len(suffix) < size {
			b.WriteString(elem)
			b.WriteByte(',')
		}
		b.WriteString(elem)
		b.WriteString(suffix)
		return b.Bytes()
	}
	for _, c := range []struct {
		name, path string
		body       []byte
	}{
		{"at values", "/v1/fit", list(`{"points":[{"x":1,"y":2},{"x":2,"y":3},{"x":3,"y":5}],"at":[`, "0", "]}")},
		{"decision levels", "/v1/method-comparison", list(`{"samples":[{"x":1,"y":2},{"x":2,"y":3},{"x":3,"y":5}],"decision_levels":[`, "0", "]}")},
		{"samples", "/v1/method-comparison", list(`{"samples":[`, `{"x":1,"y":2}`, "]}")},
		{"empty datasets", "/v1/batch", list(`{"datasets":[`, "{}", "]}")},
	} {
		t0 := time.Now()
		code := -1
		if resp, err := client.Post(base+c.path, "application/json", bytes.NewReader(c.body)); err == nil {
			_, _ = io.Copy(io.Discard, resp.Body)
			resp.Body.Close()
			code = resp.StatusCode
		}
		fmt.Fprintf(stdout, "giant list of %s (%.1f MB): %d in %v\n", c.name, float64(len(c.body))/1e6, code, time.Since(t0).Round(time.Millisecond))
		printMemory(stdout, child)
	}
}

// rawPoster sends one fixed POST on keep-alive HTTP/1.1 connections that
// it writes and reads itself: the request in one write, the answer's
// status, headers and body (Content-Length or chunked) read through a
// small buffer. A net/http client costs about as much CPU per request as
// a third of the small fit it measures; this costs a write and a read.
// Connections are pooled; one that fails or is closed by the server is
// dropped and the next request dials anew.
type rawPoster struct {
	addr string
	req  []byte
	idle chan *rawConn
}

type rawConn struct {
	c net.Conn
	r *bufio.Reader
}

func newRawPoster(addr, path, contentType string, body []byte) *rawPoster {
	head := fmt.Sprintf("POST %s HTTP/1.1\r\nHost: %s\r\nContent-Type: %s\r\nContent-Length: %d\r\n\r\n", path, addr, contentType, len(body))
	return &rawPoster{addr: addr, req: append([]byte(head), body...), idle: make(chan *rawConn, 256)}
}

// do sends the request and reads the answer; it returns the status code,
// or -1 when the connection failed or the answer was malformed.
func (p *rawPoster) do() int {
	var rc *rawConn
	select {
	case rc = <-p.idle:
	default:
		c, err := net.Dial("tcp", p.addr)
		if err != nil {
			return -1
		}
		rc = &rawConn{c: c, r: bufio.NewReaderSize(c, 16<<10)}
	}
	_ = rc.c.SetDeadline(time.Now().Add(120 * time.Second))
	code, keep, err := rc.roundTrip(p.req)
	if err != nil || !keep {
		rc.c.Close()
		if err != nil {
			return -1
		}
		return code
	}
	select {
	case p.idle <- rc:
	default:
		rc.c.Close()
	}
	return code
}

func (p *rawPoster) close() {
	for {
		select {
		case rc := <-p.idle:
			rc.c.Close()
		default:
			return
		}
	}
}

// roundTrip writes req and reads one answer: its status code and whether
// the connection may be used again.
func (rc *rawConn) roundTrip(req []byte) (code int, keep bool, err error) {
	if _, err := rc.c.Write(req); err != nil {
		return 0, false, err
	}
	line, err := rc.line()
	if err != nil {
		return 0, false, err
	}
	proto, rest, _ := strings.Cut(line, " ")
	status, _, _ := strings.Cut(rest, " ")
	if code, err = strconv.Atoi(status); err != nil || !strings.HasPrefix(proto, "HTTP/1.") {
		return 0, false, fmt.Errorf("malformed status line %q", line)
	}
	length, chunked, keep := int64(-1), false, true
	for {
		h, err := rc.line()
		if err != nil {
			return 0, false, err
		}
		if h == "" {
			break
		}
		k, v, _ := strings.Cut(h, ":")
		v = strings.TrimSpace(v)
		switch strings.ToLower(k) {
		case "content-length":
			if length, err = strconv.ParseInt(v, 10, 64); err != nil {
				return 0, false, err
			}
		case "transfer-encoding":
			chunked = strings.EqualFold(v, "chunked")
		case "connection":
			keep = !strings.EqualFold(v, "close")
		}
	}
	switch {
	case chunked:
		err = rc.chunks()
	case length >= 0:
		_, err = rc.r.Discard(int(length))
	default:
		return code, false, nil // the body runs to the connection's end
	}
	return code, keep && err == nil, err
}

// chunks reads a chunked body to its end.
func (rc *rawConn) chunks() error {
	for {
		l, err := rc.line()
		if err != nil {
			return err
		}
		size, _, _ := strings.Cut(l, ";")
		n, err := strconv.ParseInt(strings.TrimSpace(size), 16, 64)
		if err != nil {
			return err
		}
		if n == 0 {
			for { // trailers, then the empty line
				if l, err = rc.line(); err != nil || l == "" {
					return err
				}
			}
		}
		if _, err := rc.r.Discard(int(n) + 2); err != nil {
			return err
		}
	}
}

// line reads one header line without its CRLF.
func (rc *rawConn) line() (string, error) {
	l, err := rc.r.ReadSlice('\n')
	if err != nil {
		return "", err
	}
	return string(bytes.TrimRight(l, "\r\n")), nil
}

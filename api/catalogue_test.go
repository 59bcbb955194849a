package api

import (
	"bufio"
	"bytes"
	"compress/gzip"
	"context"
	"eivfit/eiv/study"
	"encoding/json"
	"fmt"
	"io"
	"net"
	"net/http"
	"strings"
	"sync"
	"testing"
	"time"

	"eivfit/api/wire"
)

// The bad-input catalogue: every request goes through the real router, and
// each must end in its 4xx status with the problem naming the offending
// place. Nothing may panic, answer 5xx, hang or return a NaN.
func TestBadInputCatalogue(t *testing.T) {
	h := newHarness(t, Config{MaxBodyBytes: 256 << 10, Limits: study.Limits{MaxPoints: 2000, MaxResamples: 5000, MaxAt: 50}})
	p3 := `[{"x":1,"y":2},{"x":2,"y":3},{"x":3,"y":5}]`
	pts := func(extra string) string { return `{"points":` + p3 + extra + `}` }
	many := func(n int) string {
		var b strings.Builder
		b.WriteString(`{"points":[`)
		for i := range n {
			if i > 0 {
				b.WriteByte(',')
			}
			fmt.Fprintf(&b, `{"x":%d,"y":%d}`, i, 3*i+1)
		}
		b.WriteString(`]}`)
		return b.String()
	}
	cases := []struct {
		name, method, path, ctype, body string
		status                          int
		pointer                         string // "-" for no pointer check
	}{
		// Bodies that are not a request.
		{"empty body", "POST", "/v1/fit", "application/json", ``, 400, ""},
		{"null body", "POST", "/v1/fit", "application/json", `null`, 400, "/points"},
		{"array body", "POST", "/v1/fit", "application/json", `[1,2,3]`, 400, ""},
		{"string body", "POST", "/v1/fit", "application/json", `"points"`, 400, ""},
		{"number body", "POST", "/v1/fit", "application/json", `42`, 400, ""},
		{"truncated", "POST", "/v1/fit", "application/json", `{"points":[{"x":1,`, 400, "-"},
		{"two values", "POST", "/v1/fit", "application/json", pts("") + `{}`, 400, ""},
		{"deep nesting", "POST", "/v1/fit", "application/json", `{"at":` + strings.Repeat("[", 50000) + strings.Repeat("]", 50000) + `}`, 400, "-"},
		{"binary junk", "POST", "/v1/fit", "application/json", "\x00\x01\x02\xff", 400, ""},
		// Points.
		{"no points", "POST", "/v1/fit", "application/json", `{}`, 400, "/points"},
		{"empty points", "POST", "/v1/fit", "application/json", `{"points":[]}`, 400, "/points"},
		{"one point", "POST", "/v1/fit", "application/json", `{"points":[{"x":1,"y":2}]}`, 422, "/points"},
		{"two points", "POST", "/v1/fit", "application/json", `{"points":[{"x":1,"y":2},{"x":2,"y":3}]}`, 422, "/points"},
		{"constant x", "POST", "/v1/fit", "application/json", `{"points":[{"x":1,"y":2},{"x":1,"y":3},{"x":1,"y":5}]}`, 422, "/points"},
		{"NaN literal", "POST", "/v1/fit", "application/json", `{"points":[{"x":1,"y":2},{"x":NaN,"y":3}]}`, 400, "/points/1/x"},
		{"NaN string", "POST", "/v1/fit", "application/json", `{"points":[{"x":"NaN","y":2}]}`, 400, "/points/0/x"},
		{"Infinity literal", "POST", "/v1/fit", "application/json", `{"points":[{"x":1,"y":-Infinity}]}`, 400, "/points/0/y"},
		{"Inf string", "POST", "/v1/fit", "application/json", `{"points":[{"x":1,"y":"Inf"}]}`, 400, "/points/0/y"},
		{"number too large", "POST", "/v1/fit", "application/json", `{"points":[{"x":1e309,"y":2}]}`, 400, "/points/0/x"},
		{"near the limit", "POST", "/v1/fit", "application/json", `{"points":[{"x":1e300,"y":2},{"x":2e300,"y":3},{"x":3e300,"y":5}]}`, 422, "/points"},
		{"negative sx", "POST", "/v1/fit", "application/json", `{"points":[{"x":1,"y":2,"sx":-0.1,"sy":1},{"x":2,"y":3,"sx":1,"sy":1},{"x":3,"y":5,"sx":1,"sy":1}]}`, 400, "/points/0/sx"},
		{"zero sx and sy for york", "POST", "/v1/fit", "application/json", `{"points":[{"x":1,"y":2,"sx":0,"sy":0},{"x":2,"y":3,"sx":1,"sy":1},{"x":3,"y":5,"sx":1,"sy":1}],"methods":["york"]}`, 422, "/points/0/sy"},
		{"r = 1", "POST", "/v1/fit", "application/json", `{"points":[{"x":1,"y":2,"sx":1,"sy":1,"r":1},{"x":2,"y":3,"sx":1,"sy":1,"r":0},{"x":3,"y":5,"sx":1,"sy":1,"r":0}]}`, 400, "/points/0/r"},
		{"r = -1.5", "POST", "/v1/fit", "application/json", `{"points":[{"x":1,"y":2,"sx":1,"sy":1,"r":0},{"x":2,"y":3,"sx":1,"sy":1,"r":-1.5},{"x":3,"y":5,"sx":1,"sy":1,"r":0}]}`, 400, "/points/1/r"},
		{"r without sigma", "POST", "/v1/fit", "application/json", `{"points":[{"x":1,"y":2,"r":0.1},{"x":2,"y":3,"r":0.1},{"x":3,"y":5,"r":0.1}]}`, 400, "/points/0/r"},
		{"typo sigma_x", "POST", "/v1/fit", "application/json", `{"points":[{"x":1,"y":2,"sigma_x":0.1}]}`, 400, "/points/0/sigma_x"},
		{"unknown top field", "POST", "/v1/fit", "application/json", pts(`,"lamda":2`), 400, "/lamda"},
		{"point is a number", "POST", "/v1/fit", "application/json", `{"points":[1,2,3]}`, 400, "/points/0"},
		{"too many points", "POST", "/v1/fit", "application/json", many(2001), 413, "/points"},
		// Options.
		{"confidence 1", "POST", "/v1/fit", "application/json", pts(`,"confidence":1`), 400, "/confidence"},
		{"confidence -0.5", "POST", "/v1/fit", "application/json", pts(`,"confidence":-0.5`), 400, "/confidence"},
		{"confidence string", "POST", "/v1/fit", "application/json", pts(`,"confidence":"95%"`), 400, "/confidence"},
		{"negative lambda", "POST", "/v1/fit", "application/json", pts(`,"lambda":-1`), 400, "/lambda"},
		{"lambda zero", "POST", "/v1/fit", "application/json", pts(`,"lambda":0`), 400, "/lambda"},
		{"unknown method", "POST", "/v1/fit", "application/json", pts(`,"methods":["tls"]`), 400, "/methods/0"},
		{"huge resamples", "POST", "/v1/fit", "application/json", pts(`,"bootstrap":{"resamples":1000000000}`), 400, "/bootstrap/resamples"},
		{"resamples over limit", "POST", "/v1/fit", "application/json", pts(`,"bootstrap":{"resamples":5001}`), 400, "/bootstrap/resamples"},
		{"negative resamples", "POST", "/v1/fit", "application/json", pts(`,"bootstrap":{"resamples":-5}`), 400, "/bootstrap/resamples"},
		{"bad scheme", "POST", "/v1/fit", "application/json", pts(`,"bootstrap":{"resamples":200,"scheme":"wild"}`), 400, "/bootstrap/scheme"},
		{"too many at", "POST", "/v1/fit", "application/json", pts(`,"at":[` + strings.TrimSuffix(strings.Repeat("1,", 51), ",") + `]`), 400, "/at"},
		{"at NaN", "POST", "/v1/fit", "application/json", pts(`,"at":[NaN]`), 400, "/at/0"},
		// CSV.
		{"csv ragged", "POST", "/v1/fit", "text/csv", "x,y\n1,2\n2,3,4\n3,5\n", 400, "row 3, column 1"},
		{"csv headerless", "POST", "/v1/fit", "text/csv", "1,2\n2,3\n3,5\n", 400, "row 1"},
		{"csv semicolon", "POST", "/v1/fit", "text/csv", "x;y\n1;2\n2;3\n3;5\n", 400, "row 1"},
		{"csv decimal comma", "POST", "/v1/fit", "text/csv", "x,y\n\"1,5\",2\n", 400, "row 2, column x"},
		{"csv non-UTF-8 header", "POST", "/v1/fit", "text/csv", "x,y,\xff\xfe\n1,2,3\n", 400, "row 1, column 3"},
		{"csv NaN", "POST", "/v1/fit", "text/csv", "x,y\n1,2\nNaN,3\n3,5\n", 400, "row 3, column x"},
		{"csv empty", "POST", "/v1/fit", "text/csv", "", 400, "row 1"},
		{"csv only header", "POST", "/v1/fit", "text/csv", "x,y\n", 400, "body"},
		{"csv bad query", "POST", "/v1/fit?resamples=lots", "text/csv", "x,y\n1,2\n2,3\n3,5\n", 400, "query parameter resamples"},
		// Media types, methods, sizes.
		{"xml", "POST", "/v1/fit", "application/xml", `<points/>`, 415, "-"},
		{"form", "POST", "/v1/fit", "application/x-www-form-urlencoded", `x=1`, 415, "-"},
		{"no content type", "POST", "/v1/fit", "", pts(""), 415, "-"},
		{"GET fit", "GET", "/v1/fit", "", "", 405, "-"},
		{"DELETE compare", "DELETE", "/v1/method-comparison", "", "", 405, "-"},
		{"body over limit", "POST", "/v1/fit", "application/json", many(30000), 413, "-"},
		{"batch not array", "POST", "/v1/batch", "application/json", `{"datasets":{}}`, 400, "/datasets"},
		{"compare unknown", "POST", "/v1/method-comparison", "application/json", `{"samples":[],"decision":[1]}`, 400, "/decision"},
		// Confidence levels whose quantiles double precision cannot resolve.
		{"confidence rounds to 1", "POST", "/v1/fit", "application/json", pts(`,"confidence":0.9999999999999999`), 400, "/confidence"},
		{"confidence 1e-300", "POST", "/v1/fit", "application/json", pts(`,"confidence":1e-300`), 400, "/confidence"},
		{"csv confidence rounds to 1", "POST", "/v1/fit?confidence=0.9999999999999999", "text/csv", "x,y\n1,2\n2,3\n3,5\n", 400, "query parameter confidence"},
		{"compare confidence rounds to 1", "POST", "/v1/method-comparison", "application/json", `{"samples":[{"id":"a","x":[1],"y":[2]}],"confidence":0.9999999999999999}`, 400, "/confidence"},
		{"plot confidence rounds to 1", "POST", "/v1/plots/data?confidence=0.9999999999999999", "text/csv", "x,y\n1,2\n2,3\n3,5\n", 400, "query parameter confidence"},
		// Content codings are refused before the body is read (see headers).
		{"gzip csv body", "POST", "/v1/fit", "text/csv", gzipped("x,y\n1,2\n2,3\n3,5\n"), 415, "header Content-Encoding"},
		{"deflate batch body", "POST", "/v1/batch", "application/json", "x\x9c", 415, "header Content-Encoding"},
		{"gzip compare body", "POST", "/v1/method-comparison", "application/json", gzipped(`{"samples":[]}`), 415, "header Content-Encoding"},
		// Accept: weights and wildcards (see headers).
		{"accept json q=0", "POST", "/v1/fit", "application/json", pts(""), 406, "header Accept"},
		{"accept xml only", "POST", "/v1/fit", "application/json", pts(""), 406, "header Accept"},
		{"accept malformed", "POST", "/v1/fit", "application/json", pts(""), 406, "header Accept"},
		{"accept batch html only", "POST", "/v1/batch", "application/json", `{"datasets":[]}`, 406, "header Accept"},
		{"accept plot json only", "POST", "/v1/plots/data", "application/json", pts(""), 406, "header Accept"},
		{"accept healthz */*;q=0", "GET", "/healthz", "", "", 406, "header Accept"},
		{"HEAD on a POST route", "HEAD", "/v1/fit", "", "", 405, "-"},
	}
	headers := map[string][]string{
		"gzip csv body":          {"Content-Encoding", "gzip"},
		"deflate batch body":     {"Content-Encoding", "deflate"},
		"gzip compare body":      {"Content-Encoding", "identity, gzip"},
		"accept json q=0":        {"Accept", "application/json;q=0"},
		"accept xml only":        {"Accept", "application/xml, text/*;q=0"},
		"accept malformed":       {"Accept", "json"},
		"accept batch html only": {"Accept", "text/html"},
		"accept plot json only":  {"Accept", "application/json"},
		"accept healthz */*;q=0": {"Accept", "*/*;q=0"},
	}
	if len(cases) < 40 {
		t.Fatalf("the catalogue has %d cases", len(cases))
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			h.t = t
			done := make(chan struct{})
			var status int
			var body string
			go func() {
				defer close(done)
				rec := h.do(c.method, c.path, c.ctype, c.body, headers[c.name]...)
				status, body = rec.Code, rec.Body.String()
			}()
			select {
			case <-done:
			case <-time.After(10 * time.Second):
				t.Fatal("the request hung")
			}
			if status != c.status {
				t.Fatalf("status %d, want %d: %s", status, c.status, wire.Truncate(body))
			}
			var p wire.Problem
			if err := json.Unmarshal([]byte(body), &p); err != nil || p.Status != c.status || p.Type == "" || p.Title == "" {
				t.Fatalf("not a problem document: %v %s", err, wire.Truncate(body))
			}
			if c.pointer != "-" && (len(p.Errors) == 0 || p.Errors[0].Pointer != c.pointer) {
				t.Errorf("errors %+v, want pointer %q", p.Errors, c.pointer)
			}
		})
	}
}

// Odd but valid inputs succeed with finite numbers (and a warning where useful).
func TestOddButValidThroughRouter(t *testing.T) {
	h := newHarness(t, Config{})
	for _, c := range []struct {
		name, ctype, body, warning string
	}{
		{"sx = 0 everywhere", "application/json", `{"points":[{"x":1,"y":2,"sx":0,"sy":0.1},{"x":2,"y":3.1,"sx":0,"sy":0.1},{"x":3,"y":3.9,"sx":0,"sy":0.1},{"x":4,"y":5.2,"sx":0,"sy":0.2}]}`, ""},
		{"perfect line", "application/json", `{"points":[{"x":1,"y":3},{"x":2,"y":5},{"x":3,"y":7},{"x":4,"y":9}]}`, "perfect_fit"},
		{"exactly three points", "application/json", `{"points":[{"x":1,"y":2},{"x":2,"y":3},{"x":3,"y":5}]}`, "few_points"},
		{"duplicate ids", "application/json", `{"points":[{"x":1,"y":2,"id":"a"},{"x":2,"y":3,"id":"a"},{"x":3,"y":5,"id":"a"}]}`, ""},
		{"BOM and CRLF", "text/csv", "\xef\xbb\xbfx,y\r\n1,2\r\n2,3\r\n3,5\r\n", ""},
		{"duplicate points", "application/json", `{"points":[{"x":1,"y":2},{"x":1,"y":2},{"x":2,"y":3},{"x":3,"y":5}]}`, ""},
		{"negative values", "application/json", `{"points":[{"x":-3,"y":-2},{"x":-2,"y":-1.1},{"x":-1,"y":0.2},{"x":0,"y":0.9}]}`, ""},
		{"tiny spread", "application/json", `{"points":[{"x":1000000.001,"y":2.0001},{"x":1000000.002,"y":2.0003},{"x":1000000.003,"y":2.0004}]}`, ""},
	} {
		t.Run(c.name, func(t *testing.T) {
			h.t = t
			rec := h.do("POST", "/v1/fit", c.ctype, c.body)
			if rec.Code != 200 {
				t.Fatalf("status %d: %s", rec.Code, wire.Truncate(rec.Body.String()))
			}
			if strings.Contains(rec.Body.String(), "NaN") || strings.Contains(rec.Body.String(), "Inf") {
				t.Error("non-finite number in the answer")
			}
			if c.warning != "" && !strings.Contains(rec.Body.String(), `"code":"`+c.warning+`"`) {
				t.Errorf("no %s warning", c.warning)
			}
		})
	}
}

// Saturation: more concurrent heavy bootstraps than compute slots. Every
// request ends in 200 or in 503 with Retry-After, well inside the deadline,
// and the request bodies held at once never exceed the memory budget.
func TestSaturation(t *testing.T) {
	if raceEnabled {
		t.Skip("timing-sensitive: runs in the plain test pass")
	}
	srv, err := NewServer(Config{Slots: 2, SlotWait: 200 * time.Millisecond, RequestTimeout: 20 * time.Second,
		MaxBodyBytes: 64 << 10, MaxInFlightBytes: 4 * (64 << 10)})
	if err != nil {
		t.Fatal(err)
	}
	base := newTCPServer(t, srv.Handler())
	body := heavyBody(200, 20000)
	const clients = 12
	var wg sync.WaitGroup
	codes := make([]int, clients)
	retry := make([]string, clients)
	took := make([]time.Duration, clients)
	var peak int64
	var mu sync.Mutex
	stop := make(chan struct{})
	go func() { // watch the budget
		for {
			select {
			case <-stop:
				return
			default:
			}
			srv.intake.mu.Lock()
			used := srv.intake.cap - srv.intake.free
			srv.intake.mu.Unlock()
			mu.Lock()
			peak = max(peak, used)
			mu.Unlock()
			time.Sleep(time.Millisecond)
		}
	}()
	for i := range clients {
		wg.Add(1)
		go func() {
			defer wg.Done()
			t0 := time.Now()
			resp, err := http.Post(base+"/v1/fit", "application/json", strings.NewReader(body))
			if err != nil {
				codes[i] = -1
				return
			}
			io.Copy(io.Discard, resp.Body)
			resp.Body.Close()
			codes[i], retry[i], took[i] = resp.StatusCode, resp.Header.Get("Retry-After"), time.Since(t0)
		}()
	}
	wg.Wait()
	close(stop)
	ok, busy := 0, 0
	for i, c := range codes {
		switch {
		case c == 200:
			ok++
		case c == 503 && retry[i] != "":
			busy++
		default:
			t.Errorf("request %d: status %d, Retry-After %q", i, c, retry[i])
		}
		if took[i] > 15*time.Second {
			t.Errorf("request %d took %v", i, took[i])
		}
	}
	if ok == 0 || busy == 0 {
		t.Errorf("%d answered 200 and %d 503: the test did not saturate", ok, busy)
	}
	if peak > srv.intake.cap {
		t.Errorf("bodies held at once %d > budget %d", peak, srv.intake.cap)
	}
	t.Logf("%d × 200, %d × 503; peak body bytes held %d of %d", ok, busy, peak, srv.intake.cap)
}

// Slow clients: headers dribbled slowloris-style are cut by
// ReadHeaderTimeout, a dribbled body by ReadTimeout, and neither holds a
// compute slot while it lasts.
func TestSlowClients(t *testing.T) {
	srv, addr := serveTCP(t, Config{ReadHeaderTimeout: 150 * time.Millisecond, ReadTimeout: 400 * time.Millisecond, Slots: 1})
	closedWithin := func(name string, write func(net.Conn), limit time.Duration) {
		conn, err := net.Dial("tcp", addr)
		if err != nil {
			t.Fatal(err)
		}
		defer conn.Close()
		start := time.Now()
		go write(conn)
		_ = conn.SetReadDeadline(time.Now().Add(5 * time.Second))
		_, _ = io.Copy(io.Discard, bufio.NewReader(conn)) // returns when the server closes
		if d := time.Since(start); d > limit {
			t.Errorf("%s: the connection lasted %v", name, d)
		}
		if len(srv.slots) != 0 {
			t.Errorf("%s: a compute slot was held", name)
		}
	}
	closedWithin("slow headers", func(c net.Conn) {
		for _, part := range []string{"POST /v1/fit HTTP/1.1\r\n", "Host: x\r\n", "Content-Type: application/json\r\n"} {
			if _, err := c.Write([]byte(part)); err != nil {
				return
			}
			time.Sleep(100 * time.Millisecond)
		}
	}, 2*time.Second)
	closedWithin("slow body", func(c net.Conn) {
		_, _ = c.Write([]byte("POST /v1/fit HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\nContent-Length: 100000\r\n\r\n"))
		for range 50 {
			if _, err := c.Write([]byte(`{"po`)); err != nil {
				return
			}
			time.Sleep(100 * time.Millisecond)
		}
	}, 3*time.Second)
}

// /metrics can move to a listener of its own.
func TestSeparateMetricsListener(t *testing.T) {
	srv, err := NewServer(Config{MetricsAddr: "127.0.0.1:0"})
	if err != nil {
		t.Fatal(err)
	}
	ln, _ := net.Listen("tcp", "127.0.0.1:0")
	mln, _ := net.Listen("tcp", "127.0.0.1:0")
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	go srv.Serve(ctx, ln, mln)
	get := func(url string) int {
		resp, err := http.Get(url)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		return resp.StatusCode
	}
	if c := get("http://" + ln.Addr().String() + "/metrics"); c != 404 {
		t.Errorf("main listener /metrics: %d, want 404", c)
	}
	if c := get("http://" + mln.Addr().String() + "/metrics"); c != 200 {
		t.Errorf("metrics listener: %d", c)
	}
}

// gzipped compresses s, as a client that sends Content-Encoding: gzip would.
func gzipped(s string) string {
	var b bytes.Buffer
	zw := gzip.NewWriter(&b)
	_, _ = zw.Write([]byte(s))
	_ = zw.Close()
	return b.String()
}

package api

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"mime/multipart"
	"net"
	"net/http"
	"net/url"
	"runtime"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	"eivfit/api/wire"
)

// Accept parsing against RFC 9110 §12.5.1: weights, wildcards, the most
// specific matching range deciding, q=0 excluding.
func TestNegotiate(t *testing.T) {
	jh := []string{"application/json", "text/html"}
	for _, c := range []struct {
		name, accept string
		offers       []string
		want         string
		ok           bool
	}{
		{"no header", "", jh, "application/json", true},
		{"anything", "*/*", jh, "application/json", true},
		{"json", "application/json", jh, "application/json", true},
		{"html", "text/html", jh, "text/html", true},
		{"json q=0 alone", "application/json;q=0", jh, "", false},
		{"json q=0 with html", "application/json;q=0, text/html", jh, "text/html", true},
		{"json q=0 beats */*", "*/*, application/json;q=0", jh, "text/html", true},
		{"specific range wins over wildcard weight", "text/*;q=0.9, text/html;q=0.1, application/json;q=0.5", jh, "application/json", true},
		{"higher weight wins", "text/html;q=0.5, application/json;q=0.8", jh, "application/json", true},
		{"browser", "text/html,application/xhtml+xml,application/xml;q=0.9,*/*;q=0.8", jh, "text/html", true},
		{"equal weights: listed first", "text/html, application/json", jh, "text/html", true},
		{"equal weights: more specific", "*/*, text/html", jh, "text/html", true},
		{"type wildcard", "application/*", jh, "application/json", true},
		{"case and spaces", " Application/JSON ; Q=0.7 ", jh, "application/json", true},
		{"charset utf-8 matches", "text/html;charset=UTF-8", jh, "text/html", true},
		{"other parameter does not", "text/html;level=1", jh, "", false},
		{"nothing offered matches", "application/xml", jh, "", false},
		{"everything q=0", "*/*;q=0", []string{"text/csv"}, "", false},
		{"malformed range", "json", jh, "", false},
		{"malformed q", "application/json;q=2", jh, "", false},
		{"q not a number", "application/json;q=high", jh, "", false},
		{"*/sub is malformed", "*/json", jh, "", false},
		{"accept-extension after q", "application/json;q=0.5;ext=1", jh, "application/json", true},
	} {
		t.Run(c.name, func(t *testing.T) {
			got, ok := negotiate(c.accept, c.offers...)
			if got != c.want || ok != c.ok {
				t.Errorf("negotiate(%q) = %q, %v; want %q, %v", c.accept, got, ok, c.want, c.ok)
			}
		})
	}
}

// Accept through the real router: the representation chosen, or 406.
func TestAcceptThroughRouter(t *testing.T) {
	h := newHarness(t, Config{})
	csv := "x,y\n1,2.1\n2,3.9\n3,6.2\n4,7.8\n"
	for _, c := range []struct {
		name, method, path, ctype, body, accept string
		status                                  int
		ctypeOut                                string
	}{
		{"fit json q=0 gets html", "POST", "/v1/fit", "text/csv", csv, "application/json;q=0, text/html", 200, "text/html; charset=utf-8"},
		{"fit json q=0 alone is 406", "POST", "/v1/fit", "text/csv", csv, "application/json;q=0", 406, "application/problem+json"},
		{"fit html weighed below json", "POST", "/v1/fit", "text/csv", csv, "text/html;q=0.5, application/json", 200, "application/json"},
		{"fit wildcard", "POST", "/v1/fit", "text/csv", csv, "*/*", 200, "application/json"},
		{"compare html q=0, json by wildcard", "POST", "/v1/method-comparison", "text/csv", "id,x,y\nA,1,2.1\nB,2,3.9\nC,3,6.2\nD,4,7.8\nE,5,10.1\n", "text/html;q=0, */*;q=0.1", 200, "application/json"},
		{"plot svg by image/*", "POST", "/v1/plots/data", "text/csv", csv, "image/*", 200, "image/svg+xml"},
		{"plot svg q=0", "POST", "/v1/plots/data", "text/csv", csv, "image/svg+xml;q=0, */*", 406, "application/problem+json"},
		{"index html q=0", "GET", "/", "", "", "text/html;q=0", 406, "application/problem+json"},
		{"openapi yaml", "GET", "/openapi.yaml", "", "", "application/yaml", 200, "application/yaml"},
		{"demo json only", "GET", "/demo/demo-glucose.csv", "", "", "application/json", 406, "application/problem+json"},
		{"report json only", "POST", "/report", "application/x-www-form-urlencoded", "csv=" + url.QueryEscape(csv), "application/json", 406, "application/problem+json"},
	} {
		t.Run(c.name, func(t *testing.T) {
			h.t = t
			rec := h.do(c.method, c.path, c.ctype, c.body, "Accept", c.accept)
			if rec.Code != c.status || rec.Header().Get("Content-Type") != c.ctypeOut {
				t.Fatalf("status %d %q, want %d %q: %s", rec.Code, rec.Header().Get("Content-Type"), c.status, c.ctypeOut, wire.Truncate(rec.Body.String()))
			}
		})
	}
}

// HEAD on every GET route answers as GET (status and headers) with no
// body, on a real listener (net/http) as through the router; HEAD on a
// POST route stays 405.
func TestHEAD(t *testing.T) {
	srv, err := NewServer(Config{})
	if err != nil {
		t.Fatal(err)
	}
	base := newTCPServer(t, srv.Handler())
	for _, c := range []struct {
		name, path string
		status     int
	}{
		{"index", "/", 200},
		{"healthz", "/healthz", 200},
		{"readyz", "/readyz", 200},
		{"openapi", "/openapi.yaml", 200},
		{"demo", "/demo/demo-glucose.csv", 200},
		{"demo missing", "/demo/nope.csv", 404},
		{"metrics", "/metrics", 200},
		{"fit is POST only", "/v1/fit", 405},
	} {
		t.Run(c.name, func(t *testing.T) {
			getCode, getType := 0, ""
			if c.status != 405 {
				resp, err := http.Get(base + c.path)
				if err != nil {
					t.Fatal(err)
				}
				resp.Body.Close()
				getCode, getType = resp.StatusCode, resp.Header.Get("Content-Type")
			}
			resp, err := http.Head(base + c.path)
			if err != nil {
				t.Fatal(err)
			}
			resp.Body.Close()
			if resp.StatusCode != c.status {
				t.Fatalf("HEAD status %d, want %d", resp.StatusCode, c.status)
			}
			if c.status != 405 && (resp.StatusCode != getCode || resp.Header.Get("Content-Type") != getType) {
				t.Errorf("HEAD %d %q, GET %d %q", resp.StatusCode, resp.Header.Get("Content-Type"), getCode, getType)
			}
			// Through the router with a recorder, which keeps whatever is
			// written: the handler itself must write no body.
			h := &harness{t: t, srv: srv}
			rec := h.do("HEAD", c.path, "", "")
			if rec.Code != c.status {
				t.Errorf("router: status %d", rec.Code)
			}
			if c.status != 405 && rec.Body.Len() != 0 {
				t.Errorf("router: HEAD wrote %d body bytes", rec.Body.Len())
			}
		})
	}
}

// /metrics on the main listener needs the key when keys are configured;
// the separate metrics listener serves it without one.
func TestMetricsNeedKey(t *testing.T) {
	keys := []string{"s3cret"}
	h := newHarness(t, Config{APIKeys: keys})
	for _, c := range []struct {
		name, method, auth string
		status             int
	}{
		{"no key", "GET", "", 401},
		{"wrong key", "GET", "Bearer nope", 401},
		{"key", "GET", "Bearer s3cret", 200},
		{"HEAD without key", "HEAD", "", 401},
		{"HEAD with key", "HEAD", "Bearer s3cret", 200},
	} {
		t.Run(c.name, func(t *testing.T) {
			h.t = t
			rec := h.do(c.method, "/metrics", "", "", "Authorization", c.auth)
			if rec.Code != c.status {
				t.Errorf("status %d, want %d", rec.Code, c.status)
			}
		})
	}
	t.Run("separate listener", func(t *testing.T) {
		srv, err := NewServer(Config{APIKeys: keys, MetricsAddr: "127.0.0.1:0"})
		if err != nil {
			t.Fatal(err)
		}
		ln, _ := net.Listen("tcp", "127.0.0.1:0")
		mln, _ := net.Listen("tcp", "127.0.0.1:0")
		ctx, cancel := context.WithCancel(context.Background())
		defer cancel()
		go srv.Serve(ctx, ln, mln)
		for addr, want := range map[string]int{ln.Addr().String(): 404, mln.Addr().String(): 200} {
			resp, err := http.Get("http://" + addr + "/metrics")
			if err != nil {
				t.Fatal(err)
			}
			resp.Body.Close()
			if resp.StatusCode != want {
				t.Errorf("%s: %d, want %d", addr, resp.StatusCode, want)
			}
		}
	})
}

// The report form says what was wrong: its media type, its size, a coding,
// a missing or empty field.
func TestReportFormErrors(t *testing.T) {
	h := newHarness(t, Config{MaxBodyBytes: 12 << 20})
	multi := func(fields map[string]string, size int) (string, string) {
		var b bytes.Buffer
		w := multipart.NewWriter(&b)
		for k, v := range fields {
			_ = w.WriteField(k, v)
		}
		if size > 0 {
			fw, _ := w.CreateFormFile("file", "big.csv")
			_, _ = fw.Write(bytes.Repeat([]byte("1,2\n"), size/4))
		}
		_ = w.Close()
		return w.FormDataContentType(), b.String()
	}
	bigCT, big := multi(map[string]string{"analysis": "fit"}, 13<<20)
	emptyFileCT, emptyFile := func() (string, string) {
		var b bytes.Buffer
		w := multipart.NewWriter(&b)
		_, _ = w.CreateFormFile("file", "empty.csv")
		_ = w.Close()
		return w.FormDataContentType(), b.String()
	}()
	for _, c := range []struct {
		name, ctype, body string
		header            []string
		status            int
		says              string
	}{
		{"10 MB urlencoded", "application/x-www-form-urlencoded", "analysis=fit&csv=" + strings.Repeat("1%2C2%0A", (10<<20)/8+1000), nil, 413, "limited to 10 MiB: upload the CSV as a file"},
		{"multipart over the body limit", bigCT, big, nil, 413, "limit of 12582912 bytes"},
		{"json body", "application/json", `{"csv":"x,y"}`, nil, 415, "must be sent as multipart/form-data or application/x-www-form-urlencoded"},
		{"no content type", "", "csv=x", nil, 415, "must be sent as multipart/form-data"},
		{"gzip form", "application/x-www-form-urlencoded", gzipped("csv=x%2Cy"), []string{"Content-Encoding", "gzip"}, 415, "send the body uncompressed"},
		{"no data field", "application/x-www-form-urlencoded", "analysis=fit&confidence=0.95", nil, 400, "carries no data: it needs a CSV file"},
		{"empty pasted data", "application/x-www-form-urlencoded", "analysis=fit&csv=+%0A", nil, 400, "The pasted data (field &#34;csv&#34;) is empty"},
		{"empty file", emptyFileCT, emptyFile, nil, 400, "The uploaded file (field &#34;file&#34;) is empty"},
		{"bad escape", "application/x-www-form-urlencoded", "csv=%zz", nil, 400, "the form could not be read"},
		{"confidence rounds to 1", "application/x-www-form-urlencoded", "csv=" + url.QueryEscape("x,y\n1,2\n2,3\n3,5\n") + "&confidence=0.9999999999999999", nil, 400, "confidence must lie between"},
	} {
		t.Run(c.name, func(t *testing.T) {
			h.t = t
			rec := h.do("POST", "/report", c.ctype, c.body, c.header...)
			if rec.Code != c.status {
				t.Fatalf("status %d, want %d", rec.Code, c.status)
			}
			if got := rec.Body.String(); !strings.Contains(got, c.says) {
				t.Errorf("the page does not say %q", c.says)
			}
			if strings.Contains(rec.Body.String(), "Choose a CSV file or paste CSV data.") {
				t.Error("the old catch-all message")
			}
		})
	}
}

// slowDataset is a York fit whose bootstrap takes far longer than the
// deadlines used below.
func slowDataset(name string) string {
	var b strings.Builder
	fmt.Fprintf(&b, `{"name":%q,"points":[`, name)
	for i := range 300 {
		if i > 0 {
			b.WriteByte(',')
		}
		fmt.Fprintf(&b, `{"x":%d,"y":%g,"sx":1,"sy":1}`, i, 2*float64(i)+float64(i%7))
	}
	b.WriteString(`],"methods":["york"],"bootstrap":{"resamples":100000,"seed":1}}`)
	return b.String()
}

const quickDataset = `{"name":"quick","points":[{"x":5.1,"y":5.3},{"x":7.2,"y":7.6},{"x":11.0,"y":11.4},{"x":15.2,"y":15.9}],"methods":["ols"]}`

// A batch at its deadline answers 200 with what finished; each dataset
// not fitted gets a deadline problem under its own pointer.
func TestBatchDeadlineKeepsFinished(t *testing.T) {
	// One slot: datasets run one at a time, in order.
	h := newHarness(t, Config{Slots: 1, RequestTimeout: 300 * time.Millisecond})
	body := `{"datasets":[` + quickDataset + `,` + slowDataset("slow") + `,{"name":"never started","points":[{"x":1,"y":2},{"x":2,"y":3},{"x":3,"y":5}]}]}`
	start := time.Now()
	rec := h.do("POST", "/v1/batch", "application/json", body)
	if d := time.Since(start); d > 10*time.Second {
		t.Errorf("took %v", d)
	}
	if rec.Code != 200 {
		t.Fatalf("status %d: %s", rec.Code, wire.Truncate(rec.Body.String()))
	}
	var resp wire.BatchResponse
	if err := json.Unmarshal(rec.Body.Bytes(), &resp); err != nil {
		t.Fatal(err)
	}
	if resp.OK != 1 || resp.Failed != 2 || len(resp.Results) != 3 {
		t.Fatalf("ok %d failed %d of %d", resp.OK, resp.Failed, len(resp.Results))
	}
	for i, want := range []struct {
		name   string
		status int
	}{{"quick", 200}, {"slow", 503}, {"never started", 503}} {
		r := resp.Results[i]
		if r.Name != want.name || r.Status != want.status {
			t.Errorf("result %d: %q %d, want %q %d", i, r.Name, r.Status, want.name, want.status)
		}
		if want.status == 200 && r.Fit == nil {
			t.Errorf("result %d: no fit", i)
		}
		if want.status == 503 && (r.Problem == nil || r.Problem.Type != wire.ProblemTypeBase+"deadline-exceeded" ||
			len(r.Problem.Errors) == 0 || r.Problem.Errors[0].Pointer != fmt.Sprintf("/datasets/%d", i)) {
			t.Errorf("result %d: problem %+v", i, r.Problem)
		}
	}
	if len(h.srv.slots) != 0 {
		t.Error("a slot was not freed")
	}
}

// A batch takes one compute slot per dataset it fits at once (up to
// GOMAXPROCS and the free slots), and holds no more than it can use.
func TestBatchTakesSlots(t *testing.T) {
	for _, c := range []struct {
		name          string
		slots, busy   int
		datasets      int
		wantHeldAtMax int
	}{
		{"one dataset takes one slot", 4, 0, 1, 1},
		{"every free slot up to GOMAXPROCS", 4, 0, 8, min(4, runtime.GOMAXPROCS(0))},
		{"only the free slots", 3, 2, 8, 1},
	} {
		t.Run(c.name, func(t *testing.T) {
			srv, err := NewServer(Config{Slots: c.slots, RequestTimeout: 200 * time.Millisecond})
			if err != nil {
				t.Fatal(err)
			}
			for range c.busy {
				srv.slots <- struct{}{}
			}
			ds := make([]string, c.datasets)
			for i := range ds {
				ds[i] = slowDataset(fmt.Sprint("d", i))
			}
			var peak atomic.Int64
			done := make(chan struct{})
			go func() {
				defer close(done)
				h := &harness{t: t, srv: srv, skipRequest: true}
				if rec := h.do("POST", "/v1/batch", "application/json", `{"datasets":[`+strings.Join(ds, ",")+`]}`); rec.Code != 200 {
					t.Errorf("status %d", rec.Code)
				}
			}()
		watch:
			for {
				select {
				case <-done:
					break watch
				default:
					peak.Store(max(peak.Load(), int64(len(srv.slots)-c.busy)))
					time.Sleep(time.Millisecond)
				}
			}
			if got := int(peak.Load()); got != c.wantHeldAtMax {
				t.Errorf("held %d slots at most, want %d", got, c.wantHeldAtMax)
			}
			if len(srv.slots) != c.busy {
				t.Errorf("%d slots still held", len(srv.slots)-c.busy)
			}
		})
	}
}

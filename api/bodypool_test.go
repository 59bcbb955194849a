package api

import (
	"bytes"
	"context"
	"crypto/sha256"
	"fmt"
	"io"
	"math/rand/v2"
	"mime/multipart"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"sync"
	"testing"
	"time"

	"eivfit/api/internal/bufpool"
	"eivfit/api/store"
	"eivfit/eiv/study"
)

// poolCase is one request of the body-reuse test: sent alone to a fresh
// server, then many times at once with all the others to one server.
type poolCase struct {
	name, path, ctype, accept string
	body                      []byte
	chunked                   bool // sent without a length
	saves                     bool // answered 201 with a study id
}

// poolPoints is n points on a line (x, y, sx, sy) as JSON or CSV rows,
// from a seed of their own.
func poolPoints(n int, csv bool) string {
	r := rand.New(rand.NewPCG(uint64(n), 20))
	var b strings.Builder
	if csv {
		b.WriteString("x,y,sx,sy\n")
	} else {
		b.WriteString(`{"points":[`)
	}
	for i := range n {
		t := 5 + 20*r.Float64()
		x, y := t+0.2*r.NormFloat64(), 0.1+1.03*t+0.25*r.NormFloat64()
		switch {
		case csv:
			fmt.Fprintf(&b, "%.5f,%.5f,0.2,0.25\n", x, y)
		case i > 0:
			b.WriteByte(',')
			fallthrough
		default:
			fmt.Fprintf(&b, `{"x":%.5f,"y":%.5f,"sx":0.2,"sy":0.25}`, x, y)
		}
	}
	if !csv {
		b.WriteString("]")
	}
	return b.String()
}

// poolCases are requests whose bodies fall in every class of the pool and
// above its largest, valid and faulty, read whole and streamed, declared
// and chunked, on every endpoint that reads a body the pool keeps: fits
// (JSON, streamed CSV, the CSV stream keeping the whole body or its rest),
// the HTML report (which hashes the body), saved studies (which store it),
// comparisons, calibrations, plots, batches (whose datasets are slices of
// the body until decoded), group_by and the report form.
func poolCases(t *testing.T) []poolCase {
	demo := func(name string) []byte {
		b, err := os.ReadFile(filepath.Join("..", "testdata", name))
		if err != nil {
			t.Fatal(err)
		}
		return b
	}
	var cases []poolCase
	add := func(c poolCase) {
		cases = append(cases, c)
		c.name += ", chunked"
		c.chunked = true
		cases = append(cases, c)
	}
	// From 40 points (1.9 KB of JSON, 1.1 KB of CSV: the 4 KiB class) by
	// about doubling to 34,000 (1.6 MB and 0.9 MB; a declared length above
	// 512 KiB takes a fresh buffer, a chunked one grows to 1 MiB and past
	// it). The York jackknife (n refits) is left to the small ones.
	for _, n := range []int{40, 110, 220, 450, 900, 1800, 3600, 7200, 14000, 25000, 34000} {
		methods, query := `"ols","deming","york"`, "methods=ols,deming,york"
		if n > 500 {
			methods, query = `"ols","deming"`, "methods=ols,deming"
		}
		js := poolPoints(n, false) + `,"methods":[` + methods + `]}`
		csv := poolPoints(n, true)
		add(poolCase{name: fmt.Sprintf("json n=%d (%d bytes)", n, len(js)), path: "/v1/fit", ctype: "application/json", body: []byte(js)})
		add(poolCase{name: fmt.Sprintf("csv n=%d (%d bytes)", n, len(csv)), path: "/v1/fit?" + query, ctype: "text/csv", body: []byte(csv)})
	}
	mid := poolPoints(1800, true)
	js := poolPoints(900, false)
	for _, c := range []poolCase{
		{name: "json, a bad number late", path: "/v1/fit", ctype: "application/json", body: []byte(js[:len(js)-20] + `,{"x":1e999,"y":2}]}`)},
		{name: "json, cut short", path: "/v1/fit", ctype: "application/json", body: []byte(js[:len(js)/2])},
		{name: "json, an unknown key", path: "/v1/fit", ctype: "application/json", body: []byte(js + `,"methodz":["ols"]}`)},
		{name: "csv, a bad cell late", path: "/v1/fit?methods=ols", ctype: "text/csv", body: []byte(mid + "1.5,zz9,0.2,0.25\n")},
		{name: "csv, a quoted cell late", path: "/v1/fit?methods=ols", ctype: "text/csv", body: []byte(mid + "\"1.5\",3,0.2,0.25\n")},
		{name: "csv, a quoted header", path: "/v1/fit?methods=ols", ctype: "text/csv", body: []byte(`"x","y","sx","sy"` + mid[len("x,y,sx,sy"):])},
		{name: "csv, ids (kept whole)", path: "/v1/fit?methods=ols,deming", ctype: "text/csv", body: []byte("id,x,y\nA,1.2,3.4\nB,1.9,4.4\nC,2.9,7.2\nD,4.0,8.5\nE,4.7,10.8\nF,5.9,13.5\n")},
		{name: "csv, decimal commas (read whole)", path: "/v1/fit?methods=ols&delimiter=semicolon&decimal=comma", ctype: "text/csv",
			body: []byte(strings.NewReplacer(",", ";", ".", ",").Replace(mid))},
		{name: "csv, a missing column", path: "/v1/fit", ctype: "text/csv", body: []byte("x,sy\n1,2\n")},
		{name: "over the body limit", path: "/v1/fit", ctype: "text/csv", body: []byte(poolPoints(130000, true))},
		{name: "html report, csv", path: "/v1/fit?at=7,11.1", ctype: "text/csv", accept: "text/html", body: demo("demo-glucose.csv")},
		{name: "html report, json", path: "/v1/fit", ctype: "application/json", accept: "text/html", body: []byte(poolPoints(300, false) + `,"methods":["ols","deming"]}`)},
		{name: "saved, json", path: "/v1/fit", ctype: "application/json", saves: true,
			body: []byte(poolPoints(200, false) + `,"methods":["ols","deming"],"save":true,"label":"pool","tags":{"run":"1"}}`)},
		{name: "saved, csv", path: "/v1/fit?methods=ols&save=true&label=pool", ctype: "text/csv", saves: true, body: []byte(poolPoints(700, true))},
		{name: "saved, html report", path: "/v1/method-comparison?decision_levels=7,11.1&unit=mmol/L&save=true", ctype: "text/csv", accept: "text/html", saves: true,
			body: demo("demo-glucose-duplicates.csv")},
		{name: "comparison, csv", path: "/v1/method-comparison?decision_levels=7,11.1&allowable_percent=5&unit=mmol/L", ctype: "text/csv", body: demo("demo-glucose-duplicates.csv")},
		{name: "calibration, csv", path: "/v1/calibration?coverage_probability=0.95&trials=2000&seed=1&forward=500", ctype: "text/csv", body: demo("demo-gas-sensor.csv")},
		{name: "plot", path: "/v1/plots/residuals?methods=ols,deming&method=deming", ctype: "text/csv", body: []byte(mid)},
		{name: "batch", path: "/v1/batch", ctype: "application/json", body: []byte(`{"defaults":{"methods":["ols","deming"]},"datasets":[` +
			poolPoints(300, false) + `},` + poolPoints(40, false) + `,"methods":["york"]},` + poolPoints(500, false) + `,"name":"third"}]}`)},
		{name: "batch, a fault in a dataset", path: "/v1/batch", ctype: "application/json", body: []byte(`{"datasets":[` +
			poolPoints(300, false) + `},{"points":[{"x":1,"y":"two"}]}]}`)},
		{name: "group_by", path: "/v1/fit?group_by=analyte&methods=ols", ctype: "text/csv",
			body: []byte("analyte,id,x,y\na,1,1,1.1\na,2,2,2.1\na,3,3,3.2\na,4,4,4.1\nb,1,1,1.1\nb,2,2,2.3\nb,3,3,3.2\nb,4,4,4.4\n")},
	} {
		add(c)
	}
	var form bytes.Buffer
	w := multipart.NewWriter(&form)
	_ = w.WriteField("analysis", "fit")
	fw, _ := w.CreateFormFile("file", "glucose.csv")
	_, _ = fw.Write(demo("demo-glucose.csv"))
	_ = w.Close()
	add(poolCase{name: "report form", path: "/report", ctype: w.FormDataContentType(), body: form.Bytes()})
	return cases
}

// poolAnswer is what a case was answered; a saved study's own id and time
// are replaced, and the study's stored input and result read back.
type poolAnswer struct {
	status      int
	ctype, body string
	input       string // a saved study's stored input
}

var (
	studyIDs  = regexp.MustCompile(`\b[a-z2-7]{26}\b`)
	hex64     = regexp.MustCompile(`\b[0-9a-f]{64}\b`)
	savedTime = regexp.MustCompile(`\d{4}-\d\d-\d\d[T ]\d\d:\d\d(:\d\d(\.\d+)?)?( ?UTC|Z)?`)
)

func poolSend(client *http.Client, addr string, c poolCase) (poolAnswer, error) {
	var r io.Reader = bytes.NewReader(c.body)
	if c.chunked {
		r = io.MultiReader(r) // no length: sent chunked
	}
	req, err := http.NewRequest("POST", "http://"+addr+c.path, r)
	if err != nil {
		return poolAnswer{}, err
	}
	req.Header.Set("Content-Type", c.ctype)
	if c.accept != "" {
		req.Header.Set("Accept", c.accept)
	}
	resp, err := client.Do(req)
	if err != nil {
		return poolAnswer{}, err
	}
	b, err := io.ReadAll(resp.Body)
	resp.Body.Close()
	if err != nil {
		return poolAnswer{}, err
	}
	a := poolAnswer{status: resp.StatusCode, ctype: resp.Header.Get("Content-Type"), body: string(b)}
	a.body = produced.ReplaceAllString(a.body, "2000-01-01T00:00:00Z")
	if c.saves && a.status == http.StatusCreated {
		id := studyIDs.FindString(a.body)
		if id == "" {
			return a, fmt.Errorf("no study id in %.200s", a.body)
		}
		// The record's own hashes cover its id and time; the input's
		// SHA-256 (of the body as received) stays.
		sum := fmt.Sprintf("%x", sha256.Sum256(c.body))
		a.body = hex64.ReplaceAllStringFunc(a.body, func(h string) string {
			if h == sum {
				return h
			}
			return "HASH"
		})
		a.body = savedTime.ReplaceAllString(strings.ReplaceAll(a.body, id, "STUDY"), "TIME")
		in, err := client.Get("http://" + addr + "/v1/studies/" + id + "/input")
		if err != nil {
			return a, err
		}
		b, err := io.ReadAll(in.Body)
		in.Body.Close()
		if err != nil {
			return a, err
		}
		a.input = string(b)
	}
	return a, nil
}

// poolServer is a server with a study store in a directory of its own,
// and the body limit the cases expect (the largest case goes past it).
func poolServer(t *testing.T) string {
	dir := t.TempDir()
	_, addr := serveTCP(t, Config{MaxBodyBytes: 3 << 20, BodyIdleTimeout: 20 * time.Second, RequestTimeout: 2 * time.Minute, Version: "pool",
		OpenStore: func(ctx context.Context, observe func(string, time.Duration, error)) (study.Store, error) {
			return store.Open(ctx, store.Config{DataDir: dir, Observe: observe})
		}})
	return addr
}

// Reusing body buffers cannot leak one request's bytes into another's
// answer: with the pool poisoned (every buffer put back is filled with a
// pattern, checked intact when it is taken again; a buffer put back twice
// panics), every case sent many times at once to one server, on
// keep-alive connections, is answered byte for byte as when it was sent
// alone to a fresh server, and a saved study's stored input is the body
// sent. A body read after its buffer went back reads the pattern (or
// another request's bytes) and answers differently; one written after
// stops the test.
func TestPooledBodiesDoNotLeak(t *testing.T) {
	if testing.Short() {
		t.Skip("sends about 300 requests, some of a megabyte")
	}
	cases := poolCases(t)
	want := make([]poolAnswer, len(cases))
	for i, c := range cases {
		a, err := poolSend(http.DefaultClient, poolServer(t), c)
		if err != nil {
			t.Fatalf("%s alone: %v", c.name, err)
		}
		if a.status >= 500 || c.saves && a.input != string(c.body) {
			t.Fatalf("%s alone: %d %.300s", c.name, a.status, a.body)
		}
		want[i] = a
	}
	statuses := map[int]int{}
	for _, a := range want {
		statuses[a.status]++
	}
	if statuses[200] < len(cases)/2 || statuses[201] == 0 || statuses[400] == 0 || statuses[413] == 0 {
		t.Fatalf("the cases should answer 200, 201, 400 and 413: %v", statuses)
	}

	defer bufpool.Poison(bufpool.Poison(true))
	gets0, reused0 := bufpool.Stats()
	addr := poolServer(t)
	const rounds, workers = 4, 6
	jobs := make(chan int)
	go func() {
		r := rand.New(rand.NewPCG(20, 20))
		for range rounds {
			for _, i := range r.Perm(len(cases)) {
				jobs <- i
			}
		}
		close(jobs)
	}()
	client := &http.Client{Transport: &http.Transport{MaxIdleConnsPerHost: workers, DisableCompression: true}}
	defer client.CloseIdleConnections()
	var wg sync.WaitGroup
	var mu sync.Mutex
	failed := map[string]bool{}
	for range workers {
		wg.Go(func() {
			for i := range jobs {
				c := cases[i]
				got, err := poolSend(client, addr, c)
				mu.Lock()
				switch {
				case err != nil:
					t.Errorf("%s: %v", c.name, err)
				case got != want[i] && !failed[c.name]:
					failed[c.name] = true
					t.Errorf("%s: answered %d %q %s\nalone %d %q %s", c.name, got.status, got.ctype, diffAt(got.body, want[i].body),
						want[i].status, want[i].ctype, diffAt(want[i].body, got.body))
					if got.input != want[i].input {
						t.Errorf("%s: the stored input differs from the body sent", c.name)
					}
				}
				mu.Unlock()
			}
		})
	}
	wg.Wait()
	gets, reused := bufpool.Stats()
	t.Logf("%d cases × %d rounds: %d pooled buffers taken, %d of them reused", len(cases), rounds, gets-gets0, reused-reused0)
	if reused-reused0 < int64(len(cases)) {
		t.Errorf("the pool reused %d buffers of %d taken: the test did not exercise reuse", reused-reused0, gets-gets0)
	}
}

// diffAt shows a around the first byte where it differs from b.
func diffAt(a, b string) string {
	i := 0
	for i < len(a) && i < len(b) && a[i] == b[i] {
		i++
	}
	lo, hi := max(0, i-80), min(len(a), i+80)
	return fmt.Sprintf("(%d bytes, first difference at %d: …%q…)", len(a), i, a[lo:hi])
}

// An upload that declares its length and stalls holds pooled pages (which
// are resident already) only up to twice what the intake budget charged
// it before its first byte: room for a declared length is pooled up to
// bufpool.MaxAhead (the whole body charged up to 256 KiB), the CSV
// stream's first block likewise; a larger declared body gets a fresh
// buffer whose pages become resident only as bytes arrive.
func TestStalledUploadHoldsNoPooledPages(t *testing.T) {
	for _, c := range []struct {
		name, path, ctype string
		length            int
		pooled            int // the class of the pooled buffer taken, 0 for none
	}{
		{"json, 100 KB", "/v1/fit", "application/json", 100_000, 128 << 10},
		{"json, 300 KB", "/v1/fit", "application/json", 300_000, 512 << 10},
		{"json, 600 KB", "/v1/fit", "application/json", 600_000, 0},
		{"json, 40 MB", "/v1/fit", "application/json", 40_000_000, 0},
		{"streamed csv, 100 KB", "/v1/fit", "text/csv", 100_000, 128 << 10},
		{"streamed csv, 40 MB", "/v1/fit", "text/csv", 40_000_000, 512 << 10},
		{"batch, 900 KB", "/v1/batch", "application/json", 900_000, 0},
	} {
		t.Run(c.name, func(t *testing.T) {
			srv, addr := serveTCP(t, Config{BodyIdleTimeout: 5 * time.Second})
			gets, _ := bufpool.Stats()
			conn, err := net.Dial("tcp", addr)
			if err != nil {
				t.Fatal(err)
			}
			defer conn.Close()
			fmt.Fprintf(conn, "POST %s HTTP/1.1\r\nHost: x\r\nContent-Type: %s\r\nContent-Length: %d\r\n\r\n", c.path, c.ctype, c.length)
			charged := int64(0)
			for deadline := time.Now().Add(3 * time.Second); charged == 0 && time.Now().Before(deadline); time.Sleep(5 * time.Millisecond) {
				charged = srv.intake.cap - srv.intake.available()
			}
			time.Sleep(20 * time.Millisecond) // the handler is in its first read
			after, _ := bufpool.Stats()
			if want := min(int64(c.length), bodyChunk); charged != want {
				t.Errorf("charged %d before the first byte, want %d", charged, want)
			}
			if got := after - gets; got != int64(min(c.pooled, 1)) {
				t.Errorf("%d pooled buffers taken, want %d", got, min(c.pooled, 1))
			}
			if int64(c.pooled) > 2*charged {
				t.Errorf("a pooled buffer of %d bytes for a charge of %d", c.pooled, charged)
			}
		})
	}
}

package main

import (
	"bytes"
	"fmt"
	"io"
	"math/rand/v2"
	"net/http"
	"os"
	"strconv"
	"strings"
	"testing"
	"time"
)

// peakRSS reads the process's peak resident set (VmHWM) in bytes.
func (p *serveProcess) peakRSS(t *testing.T) int64 {
	t.Helper()
	st, err := os.ReadFile(fmt.Sprintf("/proc/%d/status", p.cmd.Process.Pid))
	if err != nil {
		t.Skipf("no /proc: %v", err)
	}
	for _, l := range strings.Split(string(st), "\n") {
		if v, ok := strings.CutPrefix(l, "VmHWM:"); ok {
			kb, err := strconv.ParseInt(strings.TrimSuffix(strings.TrimSpace(v), " kB"), 10, 64)
			if err != nil {
				t.Fatal(err)
			}
			return kb << 10
		}
	}
	t.Fatal("no VmHWM in /proc/PID/status")
	return 0
}

func (p *serveProcess) post(path, ctype string, body []byte) (int, string, error) {
	return p.postAccept(path, ctype, "", body)
}

// postAccept posts with an Accept header ("" sends none).
func (p *serveProcess) postAccept(path, ctype, accept string, body []byte) (int, string, error) {
	req, err := http.NewRequest("POST", p.base+path, bytes.NewReader(body))
	if err != nil {
		return 0, "", err
	}
	req.Header.Set("Content-Type", ctype)
	if accept != "" {
		req.Header.Set("Accept", accept)
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		return 0, "", err
	}
	defer resp.Body.Close()
	b, _ := io.ReadAll(resp.Body)
	return resp.StatusCode, string(b), nil
}

// Memory multiple, documented in the README's limits: a server's peak
// resident memory while it answers one body stays within its resident
// memory before the request plus memSlack plus memMultiple × the body's
// size, for the largest body of each kind it accepts and for the giant
// lists it refuses.
const (
	memMultiple = 8
	memSlack    = 48 << 20 // the runtime, the compute's own buffers, page granularity
)

// giantBodies builds the test bodies, each near maxBody bytes (except the
// comparison, whose size is set by a study of 2,000 samples with 20
// replicates each: its compute, not its body, bounds it).
func giantBodies(maxBody int) []struct {
	name, path, ctype string
	body              []byte
	status            int
	accept            string
} {
	r := rand.New(rand.NewPCG(13, 2))
	num := func(b *bytes.Buffer, v float64) { b.WriteString(strconv.FormatFloat(v, 'f', 4, 64)) }
	list := func(prefix, elem, suffix string) []byte { // as many elems as fit
		var b bytes.Buffer
		b.Grow(maxBody)
		b.WriteString(prefix)
		for b.Len()+2*len(elem)+len(suffix)+2 < maxBody {
			b.WriteString(elem)
			b.WriteByte(',')
		}
		b.WriteString(elem)
		b.WriteString(suffix)
		return b.Bytes()
	}
	var fitJSON, fitCSV bytes.Buffer
	fitJSON.WriteString(`{"points":[`)
	fitCSV.WriteString("x,y,sx,sy\n")
	for i := 0; fitJSON.Len() < maxBody-200; i++ {
		t := 10 + 90*r.Float64()
		x, y := t+0.5*r.NormFloat64(), 2+1.1*t+0.7*r.NormFloat64()
		if i > 0 {
			fitJSON.WriteByte(',')
		}
		fitJSON.WriteString(`{"x":`)
		num(&fitJSON, x)
		fitJSON.WriteString(`,"y":`)
		num(&fitJSON, y)
		fitJSON.WriteString(`,"sx":0.5,"sy":0.7}`)
	}
	for fitCSV.Len() < maxBody-100 {
		t := 10 + 90*r.Float64()
		num(&fitCSV, t+0.5*r.NormFloat64())
		fitCSV.WriteByte(',')
		num(&fitCSV, 2+1.1*t+0.7*r.NormFloat64())
		fitCSV.WriteString(",0.5,0.7\n")
	}
	fitJSON.WriteString(`],"methods":["ols","deming","york"]}`)
	// A batch of 1,000 datasets (the default limit) filling the body.
	var batch bytes.Buffer
	per := maxBody/1000 - 64
	batch.WriteString(`{"datasets":[`)
	for d := range 1000 {
		if d > 0 {
			batch.WriteByte(',')
		}
		fmt.Fprintf(&batch, `{"name":"d%d","methods":["ols","deming"],"points":[`, d)
		start := batch.Len()
		for i := 0; batch.Len()-start < per; i++ {
			if i > 0 {
				batch.WriteByte(',')
			}
			fmt.Fprintf(&batch, `{"x":%d,"y":%.3f}`, i, 1.5*float64(i)+r.NormFloat64())
		}
		batch.WriteString(`]}`)
	}
	batch.WriteString(`]}`)
	var cmp bytes.Buffer
	cmp.WriteString(`{"samples":[`)
	for i := range 2000 {
		if i > 0 {
			cmp.WriteByte(',')
		}
		t := 5 + 200*r.Float64()
		fmt.Fprintf(&cmp, `{"id":"S%d","x":[`, i)
		for k := range 20 {
			if k > 0 {
				cmp.WriteByte(',')
			}
			num(&cmp, t*(1+0.02*r.NormFloat64()))
		}
		cmp.WriteString(`],"y":[`)
		for k := range 20 {
			if k > 0 {
				cmp.WriteByte(',')
			}
			num(&cmp, 1+1.02*t*(1+0.02*r.NormFloat64()))
		}
		cmp.WriteString(`]}`)
	}
	cmp.WriteString(`],"decision_levels":[50,100],"allowable_bias":{"percent":5}}`)
	p3 := `{"points":[{"x":1,"y":2},{"x":2,"y":3},{"x":3,"y":5}],"at":[`
	s3 := `{"samples":[{"x":1,"y":2},{"x":2,"y":3},{"x":3,"y":5}],"decision_levels":[`
	return []struct {
		name, path, ctype string
		body              []byte
		status            int
		accept            string // the HTML report and the plot are drawn from the same rows
	}{
		{"fit JSON, most points", "/v1/fit", "application/json", fitJSON.Bytes(), 200, ""},
		{"fit CSV, most rows", "/v1/fit", "text/csv", fitCSV.Bytes(), 200, ""},
		{"batch, 1000 datasets", "/v1/batch", "application/json", batch.Bytes(), 200, ""},
		{"method comparison, 2000 samples × 20 replicates", "/v1/method-comparison", "application/json", cmp.Bytes(), 200, ""},
		{"giant at list", "/v1/fit", "application/json", list(p3, "0", "]}"), 400, ""},
		{"giant decision_levels list", "/v1/method-comparison", "application/json", list(s3, "0", "]}"), 400, ""},
		{"giant samples list", "/v1/method-comparison", "application/json", list(`{"samples":[`, `{"x":1,"y":2}`, "]}"), 413, ""},
		{"batch of empty datasets", "/v1/batch", "application/json", list(`{"datasets":[`, "{}", "]}"), 400, ""},
		{"data plot of the most rows (binned)", "/v1/plots/data", "text/csv", fitCSV.Bytes(), 200, "image/svg+xml"},
		{"HTML report of the most rows", "/v1/fit", "text/csv", fitCSV.Bytes(), 200, "text/html"},
	}
}

// The server's peak resident memory per body kind stays within the
// documented multiple (memMultiple, memSlack) of the body. Each body goes
// to a fresh `eivfit serve` process with the deployment's GOMEMLIMIT and
// default flags, but a 16 MiB body limit to keep the test to seconds.
func TestPeakMemoryPerBody(t *testing.T) {
	if testing.Short() || raceEnabled {
		t.Skip("starts processes and measures memory (not under -race or -short)")
	}
	const maxBody = 16 << 20
	for _, c := range giantBodies(maxBody) {
		t.Run(c.name, func(t *testing.T) {
			p := startServe(t, []string{"GOMEMLIMIT=1200MiB"}, "--max-body-mib", "16", "--request-timeout", "60s")
			if code, _, err := p.post("/v1/fit", "application/json", []byte(smallFit)); err != nil || code != 200 {
				t.Fatalf("warm-up: %d %v", code, err)
			}
			before := p.peakRSS(t)
			t0 := time.Now()
			code, body, err := p.postAccept(c.path, c.ctype, c.accept, c.body)
			if err != nil {
				t.Fatal(err)
			}
			if code != c.status {
				t.Fatalf("status %d, want %d: %.300s", code, c.status, body)
			}
			peak := p.peakRSS(t)
			limit := before + memSlack + memMultiple*int64(len(c.body))
			t.Logf("body %.1f MB: peak RSS %.0f MB (before %.0f MB; +%.1f × body) in %v", float64(len(c.body))/1e6,
				float64(peak)/1e6, float64(before)/1e6, float64(peak-before)/float64(len(c.body)), time.Since(t0).Round(time.Millisecond))
			if peak > limit {
				t.Errorf("peak RSS %d > %d (before %d + %d + %d × body %d)", peak, limit, before, memSlack, memMultiple, len(c.body))
			}
		})
	}
}

const smallFit = `{"points":[{"x":1.2,"y":3.4,"sx":0.2,"sy":0.2},{"x":1.9,"y":4.4,"sx":0.2,"sy":0.2},{"x":2.9,"y":7.2,"sx":0.2,"sy":0.2},{"x":4.0,"y":8.5,"sx":0.2,"sy":0.4},{"x":4.7,"y":10.8,"sx":0.2,"sy":0.4},{"x":5.9,"y":13.5,"sx":0.2,"sy":0.4}],"methods":["ols","deming","york"]}`

// A correctness bound on latency under a specific fault: while four
// uploads that declared 64 MiB bodies send nothing, a small fit is
// answered within 100 ms of its unloaded time (before the fix each idle
// upload reserved its declared length and the fit waited the 2 s slot
// wait, then got 503). The idle uploads then get 408 when the body idle
// timeout passes.
func TestIdleUploadsDoNotBlock(t *testing.T) {
	if testing.Short() {
		t.Skip("starts a process")
	}
	p := startServe(t, nil, "--body-idle-timeout", "3s")
	timed := func() time.Duration {
		t0 := time.Now()
		code, body, err := p.post("/v1/fit", "application/json", []byte(smallFit))
		if err != nil || code != 200 {
			t.Fatalf("small fit: %d %v %.200s", code, err, body)
		}
		return time.Since(t0)
	}
	timed() // warm up
	unloaded := min(timed(), timed(), timed())
	addr := strings.TrimPrefix(p.base, "http://")
	uploads, err := openIdleConns(addr, 4, 10*time.Second)
	if err != nil {
		t.Fatal(err)
	}
	defer uploads.close()
	time.Sleep(200 * time.Millisecond) // the uploads are in their handlers
	loaded := min(timed(), timed(), timed())
	if loaded > unloaded+100*time.Millisecond {
		t.Errorf("with four idle uploads a small fit took %v (unloaded %v)", loaded, unloaded)
	}
	answers, _ := uploads.wait()
	for i, a := range answers {
		if !strings.HasPrefix(a, "HTTP/1.1 408") {
			t.Errorf("idle upload %d answered %q, want 408", i, a)
		}
	}
	t.Logf("small fit: %v unloaded, %v with four idle 64 MiB uploads", unloaded, loaded)
}

package main

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"math"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"

	"eivfit/api/wire"
	"eivfit/eiv"
)

// ingestBodies are the end-to-end inputs: d as CSV (x, y, sx, sy; ten
// significant digits) and as a JSON fit request for York, with the byte
// offsets at which the first 10³ … 10⁶ rows end, for the decoders' scaling.
type ingestBodies struct {
	csv, json         []byte
	csvEnds, jsonEnds []int // after row n of ingestSizes
}

var ingestSizes = []int{1000, 10_000, 100_000, 1_000_000}

func makeIngest(d eiv.Sample) ingestBodies {
	var b ingestBodies
	c := make([]byte, 0, 50*d.Len())
	j := make([]byte, 0, 70*d.Len())
	c = append(c, "x,y,sx,sy\n"...)
	j = append(j, `{"methods":["york"],"points":[`...)
	f := func(dst []byte, v float64) []byte { return strconv.AppendFloat(dst, v, 'g', 10, 64) }
	next := 0
	for i := range d.Len() {
		c = append(f(append(f(append(f(append(f(c, d.X[i]), ','), d.Y[i]), ','), d.SX[i]), ','), d.SY[i]), '\n')
		if i > 0 {
			j = append(j, ',')
		}
		j = append(f(append(f(append(f(append(f(append(j, `{"x":`...), d.X[i]), `,"y":`...), d.Y[i]), `,"sx":`...), d.SX[i]), `,"sy":`...), d.SY[i]), '}')
		if next < len(ingestSizes) && i+1 == ingestSizes[next] {
			b.csvEnds, b.jsonEnds = append(b.csvEnds, len(c)), append(b.jsonEnds, len(j))
			next++
		}
	}
	b.csv, b.json = c, append(j, "]}"...)
	return b
}

// decodeTimes times the CSV and JSON decoders alone on the first n rows
// of the bodies, for each n of ingestSizes (best of several runs).
func decodeTimes(b ingestBodies) (csvT, jsonT []time.Duration) {
	for k, n := range ingestSizes {
		reps := max(3, 1_000_000/n)
		cb := b.csv[:b.csvEnds[k]]
		jb := append(bytes.Clone(b.json[:b.jsonEnds[k]]), "]}"...)
		csvT = append(csvT, best(reps, func() {
			// As the server and the command line hand them over: a
			// body read once, which the decoders take without a copy.
			if d, err := wire.DecodeCSV(wire.NewBody(cb, nil)); err != nil || d.Len() != n {
				panic(fmt.Sprintf("CSV decode of %d rows: %v", n, err))
			}
		}))
		jsonT = append(jsonT, best(reps, func() {
			if r, err := wire.DecodeFitJSON(wire.NewBody(jb, nil)); err != nil || r.Points.Len() != n {
				panic(fmt.Sprintf("JSON decode of %d rows: %v", n, err))
			}
		}))
	}
	return csvT, jsonT
}

// exponent is the log-log slope of times t over ingestSizes.
func exponent(t []time.Duration) float64 {
	var ln, lt []float64
	for k, n := range ingestSizes {
		ln, lt = append(ln, math.Log(float64(n))), append(lt, math.Log(t[k].Seconds()))
	}
	return slope(ln, lt)
}

// cliFit times `eivfit fit --methods york FILE` as a child process, the
// CLI's whole run (start, read, decode, fit, encode the answer): the best
// of seven, since a run of tens of milliseconds on a shared machine is
// often interrupted.
func cliFit(ctx context.Context, path string) (time.Duration, error) {
	exe, err := os.Executable()
	if err != nil {
		return 0, err
	}
	var runErr error
	d := best(7, func() {
		cmd := exec.CommandContext(ctx, exe, "fit", "--methods", "york", "--format", "json", path)
		cmd.Stdout, cmd.Stderr = io.Discard, io.Discard
		if err := cmd.Run(); err != nil {
			runErr = err
		}
	})
	return d, runErr
}

// serverFit posts body to /v1/fit on a fresh child server (with its
// length declared, or sent chunked without one) and returns the
// server's own time for it (the sum of eivfit_http_request_duration_seconds,
// read from /metrics before and after; best of three requests) and the
// child's peak resident memory over one such request (VmHWM after
// resetting it through /proc/PID/clear_refs; 0 where Linux does not allow).
func serverFit(ctx context.Context, body []byte, contentType, query string, chunked bool) (time.Duration, int64, error) {
	cctx, cancel := context.WithCancel(ctx)
	defer cancel()
	base, child, err := startServer(cctx, "--max-body-mib", strconv.Itoa(2*len(body)>>20+1))
	if err != nil {
		return 0, 0, err
	}
	defer stopServer(child)
	client := &http.Client{Timeout: time.Minute}
	serverSeconds := func() (float64, error) {
		resp, err := client.Get(base + "/metrics")
		if err != nil {
			return 0, err
		}
		defer resp.Body.Close()
		text, err := io.ReadAll(resp.Body)
		if err != nil {
			return 0, err
		}
		var s float64
		for _, l := range strings.Split(string(text), "\n") {
			if strings.HasPrefix(l, "eivfit_http_request_duration_seconds_sum{") && strings.Contains(l, `"/v1/fit"`) {
				f := strings.Fields(l)
				v, err := strconv.ParseFloat(f[len(f)-1], 64)
				if err != nil {
					return 0, err
				}
				s += v
			}
		}
		return s, nil
	}
	pid := child.Process.Pid
	fastest := time.Duration(math.MaxInt64)
	var peak int64
	for range 3 {
		_ = os.WriteFile(fmt.Sprintf("/proc/%d/clear_refs", pid), []byte("5"), 0)
		before, err := serverSeconds()
		if err != nil {
			return 0, 0, err
		}
		var r io.Reader = bytes.NewReader(body)
		if chunked {
			r = io.MultiReader(r) // a reader of unknown length: sent chunked
		}
		resp, err := client.Post(base+"/v1/fit"+query, contentType, r)
		if err != nil {
			return 0, 0, err
		}
		_, _ = io.Copy(io.Discard, resp.Body)
		resp.Body.Close()
		if resp.StatusCode != http.StatusOK {
			return 0, 0, fmt.Errorf("POST /v1/fit answered %s", resp.Status)
		}
		after, err := serverSeconds()
		if err != nil {
			return 0, 0, err
		}
		fastest = min(fastest, time.Duration((after-before)*1e9))
		peak = max(peak, vmHWM(pid))
	}
	return fastest, peak, nil
}

// vmHWM is a process's peak resident set in bytes (0 when unknown).
func vmHWM(pid int) int64 {
	st, err := os.ReadFile(fmt.Sprintf("/proc/%d/status", pid))
	if err != nil {
		return 0
	}
	for _, l := range strings.Split(string(st), "\n") {
		if v, ok := strings.CutPrefix(l, "VmHWM:"); ok {
			f := strings.Fields(v)
			kb, _ := strconv.ParseInt(f[0], 10, 64)
			return kb << 10
		}
	}
	return 0
}

// benchIngest prints the end-to-end table: the CLI and the server on a
// 10⁶-row file against scipy.odr's fit alone on the same CSV (refODR, 0
// when not measured), with the decoders' rate alone and the server's peak
// memory against the body.
func benchIngest(ctx context.Context, stdout, stderr io.Writer, b ingestBodies, csvPath string, csvT, jsonT []time.Duration, refODR time.Duration) {
	last := len(ingestSizes) - 1
	rate := func(n int, d time.Duration) string { return fmt.Sprintf("%.2f GB/s", float64(n)/d.Seconds()/1e9) }
	fmt.Fprintf(stdout, "\nend to end, n = 10⁶ (x, y, sx, sy): CSV %.0f MB, JSON %.0f MB; reference: scipy.odr's fit alone on the same CSV\n", float64(len(b.csv))/1e6, float64(len(b.json))/1e6)
	tw := tabwriter.NewWriter(stdout, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "case\teivfit\tref/eivfit\tdecode alone\tingest\tpeak RSS\tRSS/body\t")
	ratio := func(d time.Duration) string {
		if refODR <= 0 || d <= 0 {
			return "-"
		}
		return fmt.Sprintf("%.1f×", float64(refODR)/float64(d))
	}
	if d, err := cliFit(ctx, csvPath); err != nil {
		fmt.Fprintf(stderr, "eivfit bench: eivfit fit on the CSV: %v\n", err)
	} else {
		fmt.Fprintf(tw, "eivfit fit --methods york, CSV (whole run)\t%s\t%s\t%s\t%s\t-\t-\t\n", ms(d), ratio(d), ms(csvT[last]), rate(b.csvEnds[last], csvT[last]))
	}
	for _, c := range []struct {
		name, ctype, query string
		body               []byte
		dec                time.Duration
		chunked            bool
	}{
		{"POST /v1/fit, CSV, York (server time)", "text/csv", "?methods=york", b.csv, csvT[last], false},
		{"POST /v1/fit, CSV sent chunked, York (server time)", "text/csv", "?methods=york", b.csv, csvT[last], true},
		{"POST /v1/fit, JSON, York (server time)", "application/json", "", b.json, jsonT[last], false},
	} {
		d, peak, err := serverFit(ctx, c.body, c.ctype, c.query, c.chunked)
		if err != nil {
			fmt.Fprintf(stderr, "eivfit bench: %s: %v\n", c.name, err)
			continue
		}
		rss, per := "-", "-"
		if peak > 0 {
			rss, per = fmt.Sprintf("%.0f MB", float64(peak)/1e6), fmt.Sprintf("%.1f×", float64(peak)/float64(len(c.body)))
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%s\t%s\t\n", c.name, ms(d), ratio(d), ms(c.dec), rate(len(c.body), c.dec), rss, per)
	}
	_ = tw.Flush()
}

// writeIngestCSV writes the CSV body for the CLI and the reference script.
func writeIngestCSV(dir string, b ingestBodies) (string, error) {
	p := filepath.Join(dir, "big.csv")
	return p, os.WriteFile(p, b.csv, 0o644)
}

package main

import (
	"bufio"
	"bytes"
	"context"
	"encoding/binary"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"sync"
	"sync/atomic"
	"text/tabwriter"
	"time"

	"eivfit/api/wire/wiretest"
	"eivfit/eiv"
)

const benchUsage = `Usage: eivfit bench [flags]

Generates datasets, times eivfit's engine on them, times scipy.odr and
numpy on the same files in the same run (testdata/ref_bench.py with
Debian's /usr/bin/python3), and prints one table: case, eivfit, reference,
ratio, and eivfit against the machine's limit (measured here: memory
bandwidth for one-pass fits, the scalar rate for in-cache bootstraps).
Then the end-to-end rows on a 10⁶-row CSV (x, y, sx, sy) and its JSON
twin: eivfit fit --methods york as a whole run, and POST /v1/fit on a
child server (its own time, from /metrics, and its peak RSS), against
scipy.odr's fit alone on the same CSV, with the decoders' rate alone.

Flags:
`

func runBench(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("bench", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.Usage = func() { fmt.Fprint(stderr, benchUsage); fs.PrintDefaults() }
	python := fs.String("python", "/usr/bin/python3", "Python with scipy and numpy for the reference timings (\"\" skips them)")
	script := fs.String("script", "testdata/ref_bench.py", "the reference script")
	httpDur := fs.Duration("http", 10*time.Second, "duration of each HTTP load phase (0 skips the HTTP case)")
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return nil
		}
		return exitError{2}
	}
	dir, err := os.MkdirTemp("", "eivbench")
	if err != nil {
		return err
	}
	defer os.RemoveAll(dir)

	r := rand.New(rand.NewPCG(2026, 7))
	big := benchData(r, 1_000_000)
	small := benchData(r, 100)
	const B = 10_000
	idx := make([]int32, B*100)
	for i := range idx {
		idx[i] = int32(r.IntN(100))
	}
	for name, d := range map[string]eiv.Sample{"big": big, "small": small} {
		for c, v := range map[string][]float64{"x": d.X, "y": d.Y, "sx": d.SX, "sy": d.SY} {
			if err := writeF64(filepath.Join(dir, name+"_"+c+".bin"), v); err != nil {
				return err
			}
		}
	}
	var ib bytes.Buffer
	_ = binary.Write(&ib, binary.LittleEndian, idx)
	if err := os.WriteFile(filepath.Join(dir, "idx.bin"), ib.Bytes(), 0o644); err != nil {
		return err
	}
	ingest := makeIngest(big)
	csvPath, err := writeIngestCSV(dir, ingest)
	if err != nil {
		return err
	}

	fmt.Fprintf(stderr, "measuring the machine...\n")
	bw := bandwidth()     // bytes per second, one core
	flops := scalarRate() // dependent-free float ops per second, one core
	cores := runtime.GOMAXPROCS(0)

	lam, _ := eiv.LambdaFromUncertainties(big.SX, big.SY)
	var yorkIter int
	yorkFit := best(5, func() {
		f, err := eiv.York(big.X, big.Y, big.SX, big.SY, nil, nil)
		if err == nil {
			yorkIter = f.Iterations
		}
	})
	demingFit := best(9, func() { _, _ = eiv.Deming(big.X, big.Y, &eiv.DemingOptions{Lambda: lam}) })
	boot := func(est eiv.Estimator) time.Duration {
		return bestFor(300*time.Millisecond, 5, func() {
			br, err := eiv.Bootstrap(ctx, small, []eiv.Estimator{est}, &eiv.BootstrapOptions{Resamples: B, Seed: 1})
			if err == nil {
				_, _ = br.Summarize(eiv.SlopeOf(0))
			}
		})
	}
	yorkBoot := boot(eiv.YorkEstimator{})
	lamS, _ := eiv.LambdaFromUncertainties(small.SX, small.SY)
	demingBoot := boot(eiv.DemingEstimator{Lambda: lamS})
	f100, _ := eiv.York(small.X, small.Y, small.SX, small.SY, nil, nil)

	// Limits, the larger of the memory and the arithmetic bound on one
	// core (bootstraps: on every core). A York pass reads x, y, σx, σy (32
	// bytes a point) and does about 40 float operations a point (the
	// division counted as four); a fit makes one pass an iteration plus a
	// start and a closing pass. A Deming fit reads x, y (16 bytes) once with
	// about 14 operations a point. A bootstrap resample lives in cache: its
	// cost is its arithmetic, the passes of its fit plus about 10 operations
	// a point for the draw.
	bound := func(bytes, ops float64, cores int) time.Duration {
		return time.Duration(math.Max(bytes/bw, ops/flops/float64(cores)) * 1e9)
	}
	yorkPasses := float64(yorkIter + 2)
	limYork := bound(yorkPasses*32*1e6, yorkPasses*40*1e6, 1)
	limDeming := bound(16*1e6, 14*1e6, 1)
	limYorkBoot := bound(0, float64(B)*100*(40*float64(f100.Iterations+1)+10), cores)
	limDemingBoot := bound(0, float64(B)*100*(14+10), cores)

	var ref map[string]any
	if *python != "" {
		fmt.Fprintf(stderr, "timing scipy.odr and numpy (tens of seconds)...\n")
		out, err := exec.CommandContext(ctx, *python, *script, dir).Output()
		if err != nil {
			fmt.Fprintf(stderr, "eivfit bench: reference timings failed (%v); the table shows eivfit alone\n", err)
		} else if err := json.Unmarshal(out, &ref); err != nil {
			fmt.Fprintf(stderr, "eivfit bench: reference output: %v\n", err)
		}
	}
	refDur := func(k string) time.Duration {
		if v, ok := ref[k].(float64); ok {
			return time.Duration(v * 1e9)
		}
		return 0
	}

	tw := tabwriter.NewWriter(stdout, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(stdout, "eivfit bench: %d cores, memory bandwidth %.1f GB/s, scalar rate %.2f Gflop/s per core; Go %s\n\n",
		cores, bw/1e9, flops/1e9, runtime.Version())
	fmt.Fprintln(tw, "case\teivfit\treference\tref/eivfit\tlimit\teivfit/limit\t")
	row := func(name string, d, refd time.Duration, refName string, lim time.Duration) {
		rs, ratio := "-", "-"
		if refd > 0 {
			rs, ratio = ms(refd)+" "+refName, fmt.Sprintf("%.0f×", float64(refd)/float64(d))
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%.1f×\t\n", name, ms(d), rs, ratio, ms(lim), float64(d)/float64(lim))
	}
	row(fmt.Sprintf("York fit, n = 10⁶ (%d iterations)", yorkIter), yorkFit, refDur("york_fit_1e6"), "scipy.odr", limYork)
	row("Deming fit, n = 10⁶", demingFit, refDur("deming_fit_1e6"), "numpy", limDeming)
	row("York pairs bootstrap 10⁴ × 100, BCa", yorkBoot, refDur("york_boot_1e4x100"), "scipy.odr loop", limYorkBoot)
	row("Deming pairs bootstrap 10⁴ × 100, BCa", demingBoot, refDur("deming_boot_1e4x100"), "numpy vectorised", limDemingBoot)
	_ = tw.Flush()

	// Linear cost: fit time ∝ n, bootstrap ∝ B·n, measured on one core:
	// on every core the largest sizes run in parallel (York's chunked
	// passes, the decoders' chunks) and their times grow more slowly than
	// the work, which is what the exponents are to show.
	fmt.Fprintln(stdout)
	procs := runtime.GOMAXPROCS(1)
	var ln, ly, ld []float64
	for _, n := range []int{1000, 10_000, 100_000, 1_000_000} {
		d := eiv.Sample{X: big.X[:n], Y: big.Y[:n], SX: big.SX[:n], SY: big.SY[:n]}
		reps := max(3, 2_000_000/n)
		ty := best(reps, func() { _, _ = eiv.York(d.X, d.Y, d.SX, d.SY, nil, nil) })
		td := best(reps, func() { _, _ = eiv.Deming(d.X, d.Y, &eiv.DemingOptions{Lambda: lam}) })
		ln, ly, ld = append(ln, math.Log(float64(n))), append(ly, math.Log(ty.Seconds())), append(ld, math.Log(td.Seconds()))
	}
	var lbn, lbt []float64
	for _, c := range []struct{ B, n int }{{1000, 100}, {1000, 1000}, {10_000, 100}, {4000, 1000}} {
		s := eiv.Sample{X: big.X[:c.n], Y: big.Y[:c.n], SX: big.SX[:c.n], SY: big.SY[:c.n]}
		t := best(3, func() {
			_, _ = eiv.Bootstrap(ctx, s, []eiv.Estimator{eiv.YorkEstimator{}}, &eiv.BootstrapOptions{Resamples: c.B, Seed: 2, JackknifeMaxN: 1})
		})
		lbn, lbt = append(lbn, math.Log(float64(c.B*c.n))), append(lbt, math.Log(t.Seconds()))
	}
	csv1, json1 := decodeTimes(ingest)
	runtime.GOMAXPROCS(procs)
	fmt.Fprintf(stdout, "scaling exponents on one core (log-log slope; 1 is linear): York fit ∝ n^%.2f, Deming fit ∝ n^%.2f, CSV decode ∝ n^%.2f, JSON decode ∝ n^%.2f (n = 10³ … 10⁶); York bootstrap ∝ (B·n)^%.2f\n",
		slope(ln, ly), slope(ln, ld), exponent(csv1), exponent(json1), slope(lbn, lbt))
	csvT, jsonT := decodeTimes(ingest) // on every core, for the end-to-end rows
	if v, ok := ref["versions"].(map[string]any); ok {
		fmt.Fprintf(stdout, "reference: numpy %v, scipy %v (scipy.odr with analytic derivatives and its default tolerances)\n", v["numpy"], v["scipy"])
	}

	benchIngest(ctx, stdout, stderr, ingest, csvPath, csvT, jsonT, refDur("york_fit_csv_1e6"))

	if *httpDur > 0 {
		if err := benchHTTP(ctx, stdout, stderr, *httpDur); err != nil {
			fmt.Fprintf(stderr, "eivfit bench: HTTP case: %v\n", err)
		}
	}
	return nil
}

func benchData(r *rand.Rand, n int) eiv.Sample {
	s := eiv.Sample{X: make([]float64, n), Y: make([]float64, n), SX: make([]float64, n), SY: make([]float64, n)}
	for i := range n {
		t := 10 + 90*r.Float64()
		s.SX[i], s.SY[i] = 0.5+1.5*r.Float64(), 0.5+1.5*r.Float64()
		s.X[i] = t + s.SX[i]*r.NormFloat64()
		s.Y[i] = 2 + 1.1*t + s.SY[i]*r.NormFloat64()
	}
	return s
}

func writeF64(path string, v []float64) error {
	var b bytes.Buffer
	if err := binary.Write(&b, binary.LittleEndian, v); err != nil {
		return err
	}
	return os.WriteFile(path, b.Bytes(), 0o644)
}

// bestFor returns the fastest of at least reps runs, and of as many more
// as fit in total: a run of a few milliseconds on a shared machine is
// often interrupted, so short cases get more tries (as testing.B sizes its
// loop by time).
func bestFor(total time.Duration, reps int, f func()) time.Duration {
	d := time.Duration(math.MaxInt64)
	start := time.Now()
	for i := 0; i < reps || time.Since(start) < total; i++ {
		t0 := time.Now()
		f()
		d = min(d, time.Since(t0))
	}
	return d
}

// best returns the fastest of reps runs.
func best(reps int, f func()) time.Duration {
	d := time.Duration(math.MaxInt64)
	for range reps {
		t0 := time.Now()
		f()
		d = min(d, time.Since(t0))
	}
	return d
}

func ms(d time.Duration) string {
	switch {
	case d >= time.Second:
		return fmt.Sprintf("%.2f s", d.Seconds())
	case d >= 10*time.Millisecond:
		return fmt.Sprintf("%.0f ms", float64(d)/1e6)
	default:
		return fmt.Sprintf("%.2f ms", float64(d)/1e6)
	}
}

var benchSink float64

// bandwidth measures one core's streaming read rate over 64 MB.
func bandwidth() float64 {
	a := make([]float64, 8<<20)
	for i := range a {
		a[i] = float64(i)
	}
	d := best(7, func() {
		var s0, s1, s2, s3 float64
		for i := 0; i+3 < len(a); i += 4 {
			s0 += a[i]
			s1 += a[i+1]
			s2 += a[i+2]
			s3 += a[i+3]
		}
		benchSink += s0 + s1 + s2 + s3
	})
	return float64(len(a)*8) / d.Seconds()
}

// scalarRate measures scalar float operations per second on one core, with
// eight independent multiply-add chains (enough to fill the pipelines).
func scalarRate() float64 {
	const n = 40_000_000
	d := best(5, func() {
		a, b, c, e, f, g, h, k := 1.0, 1.1, 1.2, 1.3, 1.4, 1.5, 1.6, 1.7
		for range n / 8 {
			a = a*0.999999 + 1e-9
			b = b*0.999999 + 1e-9
			c = c*0.999999 + 1e-9
			e = e*0.999999 + 1e-9
			f = f*0.999999 + 1e-9
			g = g*0.999999 + 1e-9
			h = h*0.999999 + 1e-9
			k = k*0.999999 + 1e-9
		}
		benchSink += a + b + c + e + f + g + h + k
	})
	return 2 * n / d.Seconds()
}

func slope(x, y []float64) float64 {
	var mx, my float64
	for i := range x {
		mx += x[i]
		my += y[i]
	}
	mx /= float64(len(x))
	my /= float64(len(y))
	var sxy, sxx float64
	for i := range x {
		sxy += (x[i] - mx) * (y[i] - my)
		sxx += (x[i] - mx) * (x[i] - mx)
	}
	return sxy / sxx
}

// benchHTTP starts `eivfit serve` as a child process and loads it from this
// one over loopback: first closed-loop at full speed for the throughput,
// then open-loop at half that rate for the latency.
func benchHTTP(ctx context.Context, stdout, stderr io.Writer, dur time.Duration) error {
	cctx, cancel := context.WithCancel(ctx)
	defer cancel()
	base, child, err := startServer(cctx)
	if err != nil {
		return err
	}
	defer stopServer(child)
	body := wiretest.SmallFit()
	tr := &http.Transport{MaxIdleConnsPerHost: 256, MaxConnsPerHost: 256, DisableCompression: true}
	client := &http.Client{Transport: tr, Timeout: 10 * time.Second}
	one := func() bool {
		resp, err := client.Post(base+"/v1/fit", "application/json", bytes.NewReader(body))
		if err != nil {
			return false
		}
		_, _ = io.Copy(io.Discard, resp.Body)
		resp.Body.Close()
		return resp.StatusCode == 200
	}
	post := newRawPoster(strings.TrimPrefix(base, "http://"), "/v1/fit", "application/json", body)
	defer post.close()
	openLoop := func() bool { return post.do() == 200 }
	for range 200 { // warm up
		one()
	}
	// Throughput: Debian's wrk when installed (a separate, lean process),
	// else a closed loop of 32 connections from this process.
	if wrk, err := exec.LookPath("wrk"); err == nil {
		if rps, err := wrkThroughput(cctx, wrk, base, body, dur); err == nil {
			fmt.Fprintf(stdout, "\nHTTP, n = 40, ols + deming + york, over loopback:\n  wrk: %.0f requests/s (1 thread, 24 connections, %v)\n", rps, dur)
			return benchLatency(stdout, openLoop, rps/2, dur)
		} else {
			fmt.Fprintf(stderr, "wrk failed (%v); using the Go load generator\n", err)
		}
	}
	var done, failed atomic.Int64
	deadline := time.Now().Add(dur)
	var wg sync.WaitGroup
	for range 32 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for time.Now().Before(deadline) {
				if one() {
					done.Add(1)
				} else {
					failed.Add(1)
				}
			}
		}()
	}
	wg.Wait()
	rps := float64(done.Load()) / dur.Seconds()
	fmt.Fprintf(stdout, "\nHTTP, n = 40, ols + deming + york, over loopback (load generator in this process, server in a child process):\n")
	fmt.Fprintf(stdout, "  throughput %.0f requests/s with 32 connections (%d errors)\n", rps, failed.Load())
	return benchLatency(stdout, openLoop, rps/2, dur)
}

// benchLatency sends requests open-loop at a fixed rate and prints the
// latency quantiles: 8 workers, each on its own keep-alive connection,
// take the scheduled send times in turn, so that the load generator stays
// light and a slow answer delays no other request. A request's latency
// runs from the time it was due, not from when a worker got to send it, so
// a worker held up by a slow answer adds its delay to the next requests'
// latencies instead of hiding it (coordinated omission).
//
// The load generator keeps to one core (GOMAXPROCS 1) meanwhile, so that on
// a small machine it takes as little as it can from the server it measures.
func benchLatency(stdout io.Writer, one func() bool, rate float64, dur time.Duration) error {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(1))
	n := int(rate * dur.Seconds())
	lat := make([]time.Duration, n)
	okc := make([]bool, n)
	start := time.Now().Add(10 * time.Millisecond)
	const workers = 8
	var wg sync.WaitGroup
	for w := range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := w; i < n; i += workers {
				due := start.Add(time.Duration(float64(i) / rate * 1e9))
				time.Sleep(time.Until(due))
				okc[i] = one()
				lat[i] = time.Since(due)
			}
		}()
	}
	wg.Wait()
	var good []time.Duration
	for i := range lat {
		if okc[i] {
			good = append(good, lat[i])
		}
	}
	slices.Sort(good)
	q := func(p float64) time.Duration {
		if len(good) == 0 {
			return 0
		}
		return good[min(len(good)-1, int(p*float64(len(good))))]
	}
	fmt.Fprintf(stdout, "  open loop at %.0f requests/s (load generator on one core): p50 %s, p99 %s, p99.9 %s (%d of %d answered 200)\n",
		rate, ms(q(0.5)), ms(q(0.99)), ms(q(0.999)), len(good), n)
	return nil
}

// wrkThroughput runs wrk against /v1/fit with body and returns requests/s.
func wrkThroughput(ctx context.Context, wrk, base string, body []byte, dur time.Duration) (float64, error) {
	dir, err := os.MkdirTemp("", "eivwrk")
	if err != nil {
		return 0, err
	}
	defer os.RemoveAll(dir)
	script := filepath.Join(dir, "post.lua")
	lua := "wrk.method = \"POST\"\nwrk.headers[\"Content-Type\"] = \"application/json\"\nwrk.body = [[" + string(body) + "]]\n"
	if err := os.WriteFile(script, []byte(lua), 0o644); err != nil {
		return 0, err
	}
	out, err := exec.CommandContext(ctx, wrk, "-t1", "-c24", fmt.Sprintf("-d%ds", int(dur.Seconds())), "-s", script, base+"/v1/fit").Output()
	if err != nil {
		return 0, err
	}
	for _, l := range strings.Split(string(out), "\n") {
		if v, ok := strings.CutPrefix(strings.TrimSpace(l), "Requests/sec:"); ok {
			var rps float64
			_, err := fmt.Sscan(strings.TrimSpace(v), &rps)
			return rps, err
		}
	}
	return 0, errors.New("no Requests/sec line in wrk's output")
}

// startServer starts `eivfit serve` on a free loopback port as a child
// process (with flags added to serve's) and returns its base URL once it
// listens.
func startServer(ctx context.Context, flags ...string) (string, *exec.Cmd, error) {
	exe, err := os.Executable()
	if err != nil {
		return "", nil, err
	}
	cmd := exec.CommandContext(ctx, exe, append([]string{"serve", "--addr", "127.0.0.1:0", "--log-level", "error"}, flags...)...)
	out, err := cmd.StdoutPipe()
	if err != nil {
		return "", nil, err
	}
	cmd.Stderr = io.Discard
	if err := cmd.Start(); err != nil {
		return "", nil, err
	}
	sc := bufio.NewScanner(out)
	for sc.Scan() {
		if u, ok := strings.CutPrefix(sc.Text(), "eivfit "+version+" listening on "); ok {
			go io.Copy(io.Discard, out)
			return u, cmd, nil
		}
	}
	stopServer(cmd)
	return "", nil, errors.New("the server did not start")
}

// stopServer drains the child (SIGINT) and waits for it.
func stopServer(cmd *exec.Cmd) {
	_ = cmd.Process.Signal(os.Interrupt)
	_ = cmd.Wait()
}

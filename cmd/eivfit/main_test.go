package main

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"net/http"
	"net/http/httptest"
	"os"
	"os/exec"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"eivfit/api"
	"eivfit/api/answertest"
	"eivfit/api/wire"
	"eivfit/eiv/study"
)

func runCmd(t *testing.T, stdin string, args ...string) (stdout, stderr string, err error) {
	t.Helper()
	var o, e bytes.Buffer
	err = run(context.Background(), args, strings.NewReader(stdin), &o, &e)
	answertest.Check(t, o.Bytes()) // every JSON answer the CLI prints
	return o.String(), e.String(), err
}

// `eivfit fit --format json` on Pearson's data with York's weights prints the
// published York line (Neri, Saitta & Chiofalo 1989; Reed 1989: slope
// −0.480533407, intercept 5.47991022) and York et al.'s (2004) standard errors
// (0.0579850, 0.2949707), as given in testdata/ref/pearson-york.csv.
func TestFitPearsonYorkCLI(t *testing.T) {
	out, stderr, err := runCmd(t, "", "fit", "--format", "json", "../../testdata/pearson-york.csv")
	if err != nil {
		t.Fatalf("%v\n%s", err, stderr)
	}
	var resp wire.FitResponse
	if err := json.Unmarshal([]byte(out), &resp); err != nil {
		t.Fatal(err)
	}
	y := resp.Fits.York
	if y == nil {
		t.Fatal("no york fit")
	}
	for _, c := range []struct {
		name      string
		got       float64
		published string
	}{
		{"slope", y.Slope.Estimate, "-0.480533407"},
		{"intercept", y.Intercept.Estimate, "5.47991022"},
		{"se(slope)", *y.Slope.SE, "0.0579850"},
		{"se(intercept)", *y.Intercept.SE, "0.2949707"},
		{"mswd", *y.MSWD, "1.4832941"},
	} {
		want, _ := strconv.ParseFloat(c.published, 64)
		dec := len(c.published) - strings.IndexByte(c.published, '.') - 1
		if math.Abs(c.got-want) > 0.5*math.Pow(10, -float64(dec)) {
			t.Errorf("%s = %.12g, published %s", c.name, c.got, c.published)
		}
	}
	if resp.N != 10 || y.DOF != 8 || !y.Converged {
		t.Errorf("n %d dof %d converged %v", resp.N, y.DOF, y.Converged)
	}
}

func TestFitStdinAndText(t *testing.T) {
	csv := "x,y\n1,2.1\n2,3.9\n3,6.2\n4,7.8\n5,10.1\n"
	out, _, err := runCmd(t, csv, "fit", "-", "--format", "text", "--methods", "ols,deming", "--at", "2.5")
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"OLS", "Deming", "λ = 1 (assumed)", "at decision levels", "2.5"} {
		if !strings.Contains(out, want) {
			t.Errorf("text output lacks %q:\n%s", want, out)
		}
	}
}

func TestFitBadInputExitsTwo(t *testing.T) {
	cases := []struct {
		name, stdin string
		args        []string
		stderr      string
	}{
		{"bad cell", "x,y\n1,2\n2,abc\n3,4\n", []string{"fit", "-"}, "row 3, column y"},
		{"unknown column", "x,y,sigma_y\n1,2,3\n", []string{"fit", "-"}, "row 1, column sigma_y"},
		{"too few points", "x,y\n1,2\n2,3\n", []string{"fit", "-"}, "cannot be fitted"},
		{"no file", "", []string{"fit"}, "exactly one CSV file"},
		{"missing file", "", []string{"fit", "does-not-exist.csv"}, "does-not-exist.csv"},
		{"bad format", "", []string{"fit", "--format", "xml", "-"}, "--format"},
		{"bad flag", "", []string{"fit", "--sigma", "-"}, "sigma"},
		{"unknown command", "", []string{"fitt"}, "unknown command"},
		{"confidence rounds to 1", "x,y\n1,2\n2,3\n3,5\n", []string{"fit", "--confidence", "0.9999999999999999", "-"}, "--confidence: confidence must lie between"},
		{"confidence tiny", "x,y\n1,2\n2,3\n3,5\n", []string{"fit", "--confidence", "1e-300", "-"}, "--confidence"},
		{"compare confidence 1", "id,x,y\nA,1,2\n", []string{"compare", "--confidence", "1", "-"}, "--confidence"},
		{"plan without error", "", []string{"plan", "--low", "3", "--high", "25", "--sizes", "40", "--lambda", "1"}, "--error-x"},
		{"plan bad size", "", []string{"plan", "--low", "3", "--high", "25", "--error-x", "0.1", "--lambda", "1", "--sizes", "40,2"}, "--sizes"},
		{"plan bad difference", "", []string{"plan", "--error-x", "0.1", "--differences", "2%"}, "--differences"},
		{"plan file and flags", "{}", []string{"plan", "--low", "3", "-"}, "--low would be ignored"},
		{"plan bad JSON field", `{"error_x":{"sd":0.1},"sizes":[40],"lambda":1,"low":1,"high":2,"nope":1}`, []string{"plan", "-"}, "/nope"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, stderr, err := runCmd(t, c.stdin, c.args...)
			var ee exitError
			if !errors.As(err, &ee) || ee.code != 2 {
				t.Fatalf("err %v, want exit status 2", err)
			}
			if !strings.Contains(stderr, c.stderr) {
				t.Errorf("stderr %q lacks %q", stderr, c.stderr)
			}
		})
	}
}

// The demo files in testdata are the synthetic scenarios; the CLI fits them.
func TestFitDemoData(t *testing.T) {
	for _, f := range []string{"../../testdata/demo-glucose.csv"} {
		b, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Contains(b, []byte("SYNTHETIC DEMO DATA")) {
			t.Errorf("%s does not say it is invented", f)
		}
		out, stderr, err := runCmd(t, "", "fit", "--resamples", "200", "--seed", "1", f)
		if err != nil {
			t.Fatalf("%s: %v\n%s", f, err, stderr)
		}
		var resp wire.FitResponse
		if err := json.Unmarshal([]byte(out), &resp); err != nil {
			t.Fatal(err)
		}
		if resp.Fits.York == nil || resp.Fits.York.Bootstrap == nil || resp.Fits.York.Bootstrap.Seed != 1 {
			t.Errorf("%s: york or its bootstrap missing", f)
		}
	}
}

// The CLI and the service give byte-identical JSON for the same input and seed.
func TestCLIAndServiceIdentical(t *testing.T) {
	srv, err := api.NewServer(api.Config{})
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		file, query string
		args        []string
	}{
		{"../../testdata/demo-glucose.csv", "at=7,11.1&resamples=500&seed=42", []string{"--at", "7,11.1", "--resamples", "500", "--seed", "42"}},
		{"../../testdata/pearson-york.csv", "methods=york,ols&scheme=parametric&resamples=300&seed=9&confidence=0.9",
			[]string{"--methods", "york,ols", "--scheme", "parametric", "--resamples", "300", "--seed", "9", "--confidence", "0.9"}},
		{"../../testdata/demo-glucose.csv", "at=7&x_unit=mmol/L&y_unit=mg/dL", []string{"--at", "7", "--x-unit", "mmol/L", "--y-unit", "mg/dL"}},
	} {
		body, err := os.ReadFile(c.file)
		if err != nil {
			t.Fatal(err)
		}
		cli, stderr, err := runCmd(t, "", append(append([]string{"fit"}, c.args...), c.file)...)
		if err != nil {
			t.Fatalf("%v: %s", err, stderr)
		}
		rec := serveCSV(srv, "/v1/fit?"+c.query, body)
		if rec.Code != 200 {
			t.Fatalf("%s: status %d %s", c.file, rec.Code, rec.Body.String())
		}
		if rec.Body.String() != cli {
			t.Errorf("%s: CLI and service differ\nCLI:\n%.400s\nservice:\n%.400s", c.file, cli, rec.Body.String())
		}
	}
}

// `eivfit calibrate` and POST /v1/calibration give byte-identical JSON for
// the same CSV, flags and query; a bad flag names the flag.
func TestCalibrateCLIAndServiceIdentical(t *testing.T) {
	srv, err := api.NewServer(api.Config{})
	if err != nil {
		t.Fatal(err)
	}
	const file = "../../testdata/demo-gas-sensor.csv"
	body, err := os.ReadFile(file)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Contains(body, []byte("SYNTHETIC DEMO DATA")) {
		t.Errorf("%s does not say it is invented", file)
	}
	for _, c := range []struct {
		query string
		args  []string
	}{
		{"coverage_probability=0.95&trials=20000&seed=42&forward=500,1000", []string{"--coverage-probability", "0.95", "--trials", "20000", "--seed", "42", "--forward", "500,1000"}},
		{"model=gmr&shared_name=cylinder&shared_relative_u=0.003&shared_standards=M01,M02,M03&x_unit=umol/mol",
			[]string{"--model", "gmr", "--shared-name", "cylinder", "--shared-relative-u", "0.003", "--shared-standards", "M01,M02,M03", "--x-unit", "umol/mol"}},
	} {
		cli, stderr, err := runCmd(t, "", append(append([]string{"calibrate"}, c.args...), file)...)
		if err != nil {
			t.Fatalf("%v: %s", err, stderr)
		}
		rec := serveCSV(srv, "/v1/calibration?"+c.query, body)
		if rec.Code != 200 {
			t.Fatalf("status %d %s", rec.Code, rec.Body.String())
		}
		if rec.Body.String() != cli {
			t.Errorf("CLI and service differ\nCLI:\n%.400s\nservice:\n%.400s", cli, rec.Body.String())
		}
	}
	_, stderr, err := runCmd(t, "", "calibrate", "--trials", "many", file)
	if err == nil || !strings.Contains(stderr, "--trials") {
		t.Errorf("bad flag: %v %s", err, stderr)
	}
	_, stderr, err = runCmd(t, "", "calibrate", "--coverage-factor", "-1", file)
	if err == nil || !strings.Contains(stderr, "--coverage-factor") {
		t.Errorf("bad option: %v %s", err, stderr)
	}
}

// `eivfit serve` prints its URL and a curl line, serves the demo, and on
// cancellation (SIGTERM in main) drains and returns without error.
func TestServe(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	pr, pw := io.Pipe()
	done := make(chan error, 1)
	go func() {
		var stderr bytes.Buffer
		done <- run(ctx, []string{"serve", "--addr", "127.0.0.1:0", "--slots", "1"}, nil, pw, &stderr)
		pw.Close()
	}()
	sc := bufio.NewScanner(pr)
	var base, curl string
	for sc.Scan() {
		line := sc.Text()
		if u, ok := strings.CutPrefix(line, "eivfit dev listening on "); ok {
			base = u
		}
		if strings.Contains(line, "curl ") {
			curl = line
			break
		}
	}
	go io.Copy(io.Discard, pr)
	if base == "" || !strings.Contains(curl, base+"/demo/demo-glucose.csv") {
		t.Fatalf("start-up lines: base %q curl %q", base, curl)
	}
	resp, err := http.Get(base + "/demo/demo-glucose.csv")
	if err != nil {
		t.Fatal(err)
	}
	demo, _ := io.ReadAll(resp.Body)
	resp.Body.Close()
	resp, err = http.Post(base+"/v1/fit?at=7", "text/csv", bytes.NewReader(demo))
	if err != nil {
		t.Fatal(err)
	}
	var fit wire.FitResponse
	if err := json.NewDecoder(resp.Body).Decode(&fit); err != nil || fit.N != 60 {
		t.Fatalf("demo fit: %v n=%d", err, fit.N)
	}
	resp.Body.Close()
	cancel()
	select {
	case err := <-done:
		if err != nil {
			t.Fatalf("serve returned %v", err)
		}
	case <-time.After(10 * time.Second):
		t.Fatal("serve did not stop")
	}
}

// `eivfit compare` on the synthetic duplicate study flags the invented
// interference, and prints the caution; the JSON matches the service's.
func TestCompareCLI(t *testing.T) {
	out, stderr, err := runCmd(t, "", "compare", "--decision-levels", "3.9,7,11.1", "--allowable-percent", "5",
		"--unit", "mmol/L", "../../testdata/demo-glucose-duplicates.csv")
	if err != nil {
		t.Fatalf("%v: %s", err, stderr)
	}
	var resp wire.CompareResponse
	if err := json.Unmarshal([]byte(out), &resp); err != nil {
		t.Fatal(err)
	}
	if resp.N != 80 || !resp.Replicates || len(resp.DecisionLevels) != 3 || resp.Caution != study.Caution {
		t.Errorf("n %d replicates %v levels %d", resp.N, resp.Replicates, len(resp.DecisionLevels))
	}
	flagged := false
	for _, o := range resp.Diagnostics.Outliers.Flagged {
		flagged = flagged || o.ID == "D042"
	}
	if !flagged {
		t.Errorf("D042 not flagged: %+v", resp.Diagnostics.Outliers)
	}
	body, _ := os.ReadFile("../../testdata/demo-glucose-duplicates.csv")
	srv, _ := api.NewServer(api.Config{})
	rec := serveCSV(srv, "/v1/method-comparison?decision_levels=3.9,7,11.1&allowable_percent=5&unit=mmol/L&confidence=0.95", body)
	if rec.Body.String() != out {
		t.Error("CLI and service differ")
	}
	text, _, err := runCmd(t, "", "compare", "--format", "text", "../../testdata/demo-glucose-duplicates.csv")
	if err != nil || !strings.Contains(text, "Recommendation:") || !strings.Contains(text, "ISO 15189") {
		t.Errorf("text output: %v\n%s", err, text)
	}
}

// TestMain lets the test binary stand in for the eivfit binary, so that a
// test can start the service as a real process and signal it.
func TestMain(m *testing.M) {
	if os.Getenv("EIVFIT_TEST_AS_BINARY") == "1" {
		main()
		return
	}
	// serve stores studies in ./eivfit-data by default: the tests' servers
	// (in process and as child processes) use a throwaway directory instead.
	if os.Getenv("EIVFIT_DATA_DIR") == "" {
		dir, err := os.MkdirTemp("", "eivfit-test-data")
		if err != nil {
			panic(err)
		}
		os.Setenv("EIVFIT_DATA_DIR", dir)
		code := m.Run()
		os.RemoveAll(dir)
		os.Exit(code)
	}
	os.Exit(m.Run())
}

// SIGTERM during in-flight bootstraps: every request in flight completes
// with 200, new connections are refused, and the process exits 0 within
// the shutdown timeout.
func TestSIGTERMDrains(t *testing.T) {
	if testing.Short() {
		t.Skip("starts a process")
	}
	cmd := exec.Command(os.Args[0], "serve", "--addr", "127.0.0.1:0", "--shutdown-timeout", "30s", "--log-level", "error",
		"--slots", "3", "--slot-wait", "30s") // every request computes at once: none waits for a slot
	cmd.Env = append(os.Environ(), "EIVFIT_TEST_AS_BINARY=1")
	out, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	base := listeningOn(out)
	if base == "" {
		cmd.Process.Kill()
		t.Fatal("the server did not start")
	}
	var pts []string
	for i := range 300 {
		pts = append(pts, fmt.Sprintf(`{"x":%d,"y":%g,"sx":1,"sy":1}`, i, 2*float64(i)+float64(i%7)))
	}
	body := `{"points":[` + strings.Join(pts, ",") + `],"methods":["york"],"bootstrap":{"resamples":100000,"seed":1}}`
	const inflight = 3
	codes := make(chan int, inflight)
	for range inflight {
		go func() {
			resp, err := http.Post(base+"/v1/fit", "application/json", strings.NewReader(body))
			if err != nil {
				codes <- -1
				return
			}
			io.Copy(io.Discard, resp.Body)
			resp.Body.Close()
			codes <- resp.StatusCode
		}()
	}
	time.Sleep(300 * time.Millisecond) // the bootstraps are running
	start := time.Now()
	if err := cmd.Process.Signal(syscall.SIGTERM); err != nil {
		t.Fatal(err)
	}
	refused := false
	for deadline := time.Now().Add(5 * time.Second); time.Now().Before(deadline); time.Sleep(10 * time.Millisecond) {
		resp, err := http.Get(base + "/healthz")
		if err != nil {
			refused = true
			break
		}
		resp.Body.Close()
	}
	if !refused {
		t.Error("new requests were still accepted 5 s after SIGTERM")
	}
	for range inflight {
		if c := <-codes; c != 200 {
			t.Errorf("an in-flight request ended with %d", c)
		}
	}
	if err := cmd.Wait(); err != nil {
		t.Errorf("exit: %v", err)
	}
	if d := time.Since(start); d > 30*time.Second {
		t.Errorf("the drain took %v", d)
	}
}

// --api-keys-file (EIVFIT_API_KEYS_FILE) protects /v1/* with the keys in
// the file; an empty file is refused at start.
func TestServeAPIKeysFile(t *testing.T) {
	dir := t.TempDir()
	keys := dir + "/keys"
	if err := os.WriteFile(keys, []byte("# comment\nk-123\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	empty := dir + "/empty"
	_ = os.WriteFile(empty, []byte("# nothing\n"), 0o600)
	if _, stderr, err := runCmd(t, "", "serve", "--addr", "127.0.0.1:0", "--api-keys-file", empty); err == nil || !strings.Contains(stderr, "no API key") {
		t.Errorf("an empty keys file was accepted: %v %s", err, stderr)
	}
	ctx, cancel := context.WithCancel(context.Background())
	pr, pw := io.Pipe()
	done := make(chan error, 1)
	go func() {
		done <- run(ctx, []string{"serve", "--addr", "127.0.0.1:0", "--api-keys-file", keys, "--log-level", "error"}, nil, pw, io.Discard)
		pw.Close()
	}()
	base := listeningOn(pr)
	body := `{"points":[{"x":1,"y":2},{"x":2,"y":3},{"x":3,"y":5}]}`
	for _, c := range []struct {
		key  string
		want int
	}{{"", 401}, {"k-124", 401}, {"k-123", 200}} {
		req, _ := http.NewRequest("POST", base+"/v1/fit", strings.NewReader(body))
		req.Header.Set("Content-Type", "application/json")
		if c.key != "" {
			req.Header.Set("Authorization", "Bearer "+c.key)
		}
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		if resp.StatusCode != c.want {
			t.Errorf("key %q: %d, want %d", c.key, resp.StatusCode, c.want)
		}
	}
	cancel()
	if err := <-done; err != nil {
		t.Error(err)
	}
}

// `eivfit plan` from flags, from a JSON file and POST /v1/plan give the
// same bytes for the same plan.
func TestPlanCLIAndServiceIdentical(t *testing.T) {
	srv, err := api.NewServer(api.Config{})
	if err != nil {
		t.Fatal(err)
	}
	body := `{"low":3,"high":25,"error_x":{"sd":0.1,"cv_percent":2.5},"lambda":1,"replicates":{"x":2,"y":2},"sizes":[40,60],` +
		`"differences":[{"constant":0,"proportional_percent":2}],"decision_levels":[7,11.1],"allowable_bias":{"percent":5},"trials":300,"seed":3,"unit":"mmol/L"}`
	flags, stderr, err := runCmd(t, "", "plan", "--low", "3", "--high", "25", "--error-x", "0.1,2.5", "--lambda", "1", "--replicates", "2",
		"--sizes", "40,60", "--differences", "0:2", "--decision-levels", "7,11.1", "--allowable-percent", "5", "--trials", "300", "--seed", "3", "--unit", "mmol/L")
	if err != nil {
		t.Fatalf("%v: %s", err, stderr)
	}
	file, stderr, err := runCmd(t, body, "plan", "-")
	if err != nil {
		t.Fatalf("%v: %s", err, stderr)
	}
	req := httptest.NewRequest("POST", "/v1/plan", strings.NewReader(body))
	req.Header.Set("Content-Type", "application/json")
	rec := httptest.NewRecorder()
	srv.Handler().ServeHTTP(rec, req)
	if rec.Code != 200 {
		t.Fatalf("status %d %s", rec.Code, rec.Body.String())
	}
	if flags != file || file != rec.Body.String() {
		t.Errorf("flags, file and service differ:\n%.300s\n%.300s\n%.300s", flags, file, rec.Body.String())
	}
	text, _, err := runCmd(t, body, "plan", "--format", "text", "-")
	if err != nil || !strings.Contains(text, "in duplicate") || !strings.Contains(text, "slope power") {
		t.Errorf("text output (%v):\n%s", err, text)
	}
}

// serveCSV posts body as CSV to target (path and query) through srv's
// handler.
func serveCSV(srv *api.Server, target string, body []byte) *httptest.ResponseRecorder {
	req := httptest.NewRequest("POST", target, bytes.NewReader(body))
	req.Header.Set("Content-Type", "text/csv")
	rec := httptest.NewRecorder()
	srv.Handler().ServeHTTP(rec, req)
	return rec
}

// listeningOn reads the output of `eivfit serve` up to the line that says
// where it listens and returns that address ("" when the output ends
// first); the rest of the output is drained.
func listeningOn(out io.Reader) string {
	sc := bufio.NewScanner(out)
	base := ""
	for sc.Scan() {
		if u, ok := strings.CutPrefix(sc.Text(), "eivfit dev listening on "); ok {
			base = u
			break
		}
	}
	go io.Copy(io.Discard, out)
	return base
}

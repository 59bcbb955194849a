package main

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"io"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"eivfit/api"
	"eivfit/api/store"
	"eivfit/api/store/storetest"
	"eivfit/api/wire"
	"eivfit/eiv/study"
)

var savedLine = regexp.MustCompile(`eivfit: saved study ([a-z2-7]+) at (\S+)`)

// savedID reads the study id the CLI printed on stderr.
func savedID(t *testing.T, stderr string) string {
	t.Helper()
	m := savedLine.FindStringSubmatch(stderr)
	if m == nil || !study.ValidID(m[1]) || m[2] == "" {
		t.Fatalf("no saved study on stderr: %q", stderr)
	}
	return m[1]
}

// storeServer is the service in process on a study store.
func storeServer(t *testing.T, cfg store.Config) (*api.Server, study.Store) {
	t.Helper()
	st, err := store.Open(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	ver, rev := buildVersion()
	srv, err := api.NewServer(api.Config{Version: ver, VCSRevision: rev,
		OpenStore: func(context.Context, func(string, time.Duration, error)) (study.Store, error) { return st, nil }})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { srv.Close() })
	return srv, st
}

func serveInProcess(srv *api.Server, method, target, contentType, accept string, body []byte) *httptest.ResponseRecorder {
	req := httptest.NewRequest(method, target, bytes.NewReader(body))
	if contentType != "" {
		req.Header.Set("Content-Type", contentType)
	}
	if accept != "" {
		req.Header.Set("Accept", accept)
	}
	rec := httptest.NewRecorder()
	srv.Handler().ServeHTTP(rec, req)
	return rec
}

// A study saved by `eivfit fit|compare|calibrate --save` into a data
// directory is the record POST …?save=true stores for the same CSV and
// query: every field but the id and the time is equal to that of the
// same request saved through the HTTP route; a server process on the
// data directory re-renders its HTML report byte for byte as the HTTP
// route's record renders it (given the CLI's id and time); the CLI prints
// the JSON it prints without --save; `eivfit studies verify` passes.
func TestSaveCLIIsTheHTTPRecord(t *testing.T) {
	if testing.Short() {
		t.Skip("starts a process")
	}
	cliDir := t.TempDir()
	cases := []struct {
		name, cmd, file string
		args            []string
		// path and query are the same request as sent to the service:
		// the query's keys in sorted order, as the CLI (url.Values.Encode)
		// writes them.
		path, query string
	}{
		{"fit", "fit", "../../testdata/demo-glucose.csv",
			[]string{"--at", "7,11.1", "--resamples", "300", "--seed", "42", "--label", "glucose swap", "--tag", "analyte=glucose", "--tag", "site=north"},
			"/v1/fit", "at=7%2C11.1&label=glucose+swap&resamples=300&save=true&seed=42&tag=analyte%3Aglucose&tag=site%3Anorth"},
		{"compare", "compare", "../../testdata/demo-glucose-duplicates.csv",
			[]string{"--decision-levels", "3.9,7,11.1", "--allowable-percent", "5", "--unit", "mmol/L", "--label", "duplicates"},
			"/v1/method-comparison", "allowable_percent=5&decision_levels=3.9%2C7%2C11.1&label=duplicates&save=true&unit=mmol%2FL"},
		{"calibrate", "calibrate", "../../testdata/demo-gas-sensor.csv",
			[]string{"--trials", "20000", "--seed", "7", "--forward", "500,1000", "--tag", "gas=co2"},
			"/v1/calibration", "forward=500%2C1000&save=true&seed=7&tag=gas%3Aco2&trials=20000"},
	}
	type saved struct{ cliID, httpID string }
	var all []saved
	httpCfg := store.Config{DataDir: t.TempDir()}
	httpSrv, httpStore := storeServer(t, httpCfg)
	for _, c := range cases {
		body, err := os.ReadFile(c.file)
		if err != nil {
			t.Fatal(err)
		}
		out, stderr, err := runCmd(t, "", append(append([]string{c.cmd, "--save", "--data-dir", cliDir}, c.args...), c.file)...)
		if err != nil {
			t.Fatalf("%s: %v\n%s", c.name, err, stderr)
		}
		id := savedID(t, stderr)
		if !strings.Contains(stderr, "/v1/studies/"+id) || !strings.Contains(stderr, filepath.Join(cliDir, store.DatabaseFile)) {
			t.Errorf("%s: stderr %q lacks the location", c.name, stderr)
		}
		var plainArgs []string // the same command without the record's flags
		for i := 0; i < len(c.args); i += 2 {
			if c.args[i] != "--label" && c.args[i] != "--tag" {
				plainArgs = append(plainArgs, c.args[i], c.args[i+1])
			}
		}
		plain, stderr, err := runCmd(t, "", append(append([]string{c.cmd}, plainArgs...), c.file)...)
		if err != nil {
			t.Fatalf("%s without --save: %v\n%s", c.name, err, stderr)
		}
		if out != plain {
			t.Errorf("%s: --save prints other JSON than without it\n%.300s\n%.300s", c.name, out, plain)
		}
		rec := serveInProcess(httpSrv, "POST", c.path+"?"+c.query, "text/csv", "", body)
		if rec.Code != http.StatusCreated {
			t.Fatalf("%s: HTTP save %d %s", c.name, rec.Code, rec.Body.String())
		}
		var created wire.Created
		if err := json.Unmarshal(rec.Body.Bytes(), &created); err != nil {
			t.Fatal(err)
		}
		all = append(all, saved{id, created.ID})
	}
	cliStore, err := store.Open(context.Background(), store.Config{DataDir: cliDir})
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	var twins []*study.Study
	for i, s := range all {
		a, err := cliStore.Get(ctx, s.cliID)
		if err != nil {
			t.Fatalf("%s: %v", cases[i].name, err)
		}
		b, err := httpStore.Get(ctx, s.httpID)
		if err != nil {
			t.Fatal(err)
		}
		a2, b2 := *a, *b
		a2.ID, a2.Created, b2.ID, b2.Created = "", time.Time{}, "", time.Time{}
		aj, _ := json.Marshal(a2)
		bj, _ := json.Marshal(b2)
		if !bytes.Equal(aj, bj) {
			t.Errorf("%s: the CLI's record differs from the HTTP route's\nCLI:  %.600s\nHTTP: %.600s", cases[i].name, aj, bj)
		}
		twin := *b // the HTTP route's record, under the CLI's id and time
		twin.ID, twin.Created = a.ID, a.Created
		twins = append(twins, &twin)
	}
	cliStore.Close()

	twinSrv, twinStore := storeServer(t, store.Config{DataDir: t.TempDir()})
	for _, tw := range twins {
		if err := twinStore.Save(ctx, tw); err != nil {
			t.Fatal(err)
		}
	}
	p := startServe(t, nil, "--data-dir", cliDir)
	for i, s := range all {
		code, _, got := do(t, "GET", p.base+"/v1/studies/"+s.cliID, "", "text/html", nil)
		want := serveInProcess(twinSrv, "GET", "/v1/studies/"+s.cliID, "", "text/html", nil)
		if code != 200 || want.Code != 200 {
			t.Fatalf("%s: report %d (twin %d): %.300s", cases[i].name, code, want.Code, got)
		}
		if !bytes.Equal(got, want.Body.Bytes()) {
			t.Errorf("%s: the served report differs from the one the HTTP route's record gives", cases[i].name)
		}
		if !bytes.Contains(got, []byte(s.cliID)) {
			t.Errorf("%s: the report does not name its study", cases[i].name)
		}
	}
	out, stderr, err := runCmd(t, "", "studies", "verify", "--data-dir", cliDir)
	if err != nil || !strings.Contains(out, "3 studies checked, 0 mismatched") {
		t.Errorf("studies verify: %v\n%s%s", err, out, stderr)
	}
}

// With a seed drawn at random, the record keeps the seed used: the text
// printed with --save is the text of the same fit with that seed, and the
// stored result its JSON.
func TestSaveCLIDrawnSeed(t *testing.T) {
	dir := t.TempDir()
	const file = "../../testdata/demo-glucose.csv"
	text, stderr, err := runCmd(t, "", "fit", "--save", "--data-dir", dir, "--resamples", "200", "--format", "text", file)
	if err != nil {
		t.Fatalf("%v\n%s", err, stderr)
	}
	id := savedID(t, stderr)
	st, err := store.Open(context.Background(), store.Config{DataDir: dir})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	s, err := st.Get(context.Background(), id)
	if err != nil {
		t.Fatal(err)
	}
	if s.Seed == 0 {
		t.Fatal("no seed stored for a bootstrap with a drawn seed")
	}
	seed := strconv.FormatUint(s.Seed, 10)
	again, _, err := runCmd(t, "", "fit", "--resamples", "200", "--format", "text", "--seed", seed, file)
	if err != nil || again != text {
		t.Errorf("the saved text differs from the fit with the stored seed %s (%v)\n%.400s\n%.400s", seed, err, text, again)
	}
	js, _, err := runCmd(t, "", "fit", "--resamples", "200", "--seed", seed, file)
	if err != nil || js != string(s.Result) {
		t.Errorf("the stored result differs from the fit with the stored seed (%v)", err)
	}
}

// --save on every engine: the data directory's SQLite, and PostgreSQL
// when EIVFIT_DATABASE_URL is set (as for `eivfit serve` and `eivfit
// studies`).
func TestSaveCLIEngines(t *testing.T) {
	for _, e := range storetest.Engines {
		t.Run(e.Name, func(t *testing.T) {
			cfg := e.Config(t)
			args := []string{"calibrate", "--save", "--label", "sensor 4", "--seed", "3", "--trials", "5000"}
			if cfg.DatabaseURL != "" {
				t.Setenv("EIVFIT_DATABASE_URL", cfg.DatabaseURL)
			} else {
				args = append(args, "--data-dir", cfg.DataDir)
			}
			out, stderr, err := runCmd(t, "", append(args, "../../testdata/demo-gas-sensor.csv")...)
			if err != nil {
				t.Fatalf("%v\n%s", err, stderr)
			}
			id := savedID(t, stderr)
			st, err := store.Open(context.Background(), cfg)
			if err != nil {
				t.Fatal(err)
			}
			defer st.Close()
			s, err := st.Get(context.Background(), id)
			if err != nil {
				t.Fatal(err)
			}
			body, _ := os.ReadFile("../../testdata/demo-gas-sensor.csv")
			if s.Kind != study.KindCalibration || s.Label != "sensor 4" || !bytes.Equal(s.Input, body) || string(s.Result) != out ||
				s.ContentType != "text/csv" || s.Seed != 3 {
				t.Errorf("stored %s %q %d bytes, content type %q, seed %d; result equal %v",
					s.Kind, s.Label, len(s.Input), s.ContentType, s.Seed, string(s.Result) == out)
			}
		})
	}
}

// --save --server posts to a server with the key of $EIVFIT_API_KEY (or
// --api-key): the study is the key holder's, and the CLI prints the
// server's location. A key without the right, or none, saves nothing and
// exits 1 with the server's reason.
func TestSaveCLIServer(t *testing.T) {
	dir := t.TempDir()
	keys := filepath.Join(dir, "keys")
	if err := os.WriteFile(keys, []byte("ana analyse k-analyse-1\nrita read k-read-1\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	pr, pw := io.Pipe()
	done := make(chan error, 1)
	go func() {
		done <- run(ctx, []string{"serve", "--addr", "127.0.0.1:0", "--api-keys-file", keys, "--data-dir", filepath.Join(dir, "data"), "--log-level", "error"}, nil, pw, io.Discard)
		pw.Close()
	}()
	base := readBase(t, pr)
	const file = "../../testdata/demo-glucose.csv"
	plain, _, err := runCmd(t, "", "fit", "--at", "7", file)
	if err != nil {
		t.Fatal(err)
	}
	t.Setenv("EIVFIT_API_KEY", "k-analyse-1")
	out, stderr, err := runCmd(t, "", "fit", "--save", "--server", base+"/", "--at", "7", "--tag", "analyte=glucose", file)
	if err != nil {
		t.Fatalf("%v\n%s", err, stderr)
	}
	id := savedID(t, stderr)
	if !strings.Contains(stderr, "at "+base+"/v1/studies/"+id) {
		t.Errorf("stderr %q lacks the server's location", stderr)
	}
	if out != plain {
		t.Error("--save --server prints other JSON than the fit without --save")
	}
	req, _ := http.NewRequest("GET", base+"/v1/studies/"+id, nil)
	req.Header.Set("Authorization", "Bearer k-read-1")
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	var got wire.StudyOut
	json.NewDecoder(resp.Body).Decode(&got)
	resp.Body.Close()
	if resp.StatusCode != 200 || got.Who != "ana" || got.Tags["analyte"] != "glucose" || string(got.Result)+"\n" != out {
		t.Errorf("stored study: %d who %q tags %v", resp.StatusCode, got.Who, got.Tags)
	}
	for _, c := range []struct {
		name, key string
		stderr    string
	}{
		{"read role", "k-read-1", "403"},
		{"no key", "", "401"},
	} {
		t.Run(c.name, func(t *testing.T) {
			t.Setenv("EIVFIT_API_KEY", c.key)
			_, stderr, err := runCmd(t, "", "fit", "--save", "--server", base, file)
			var ee exitError
			if !errors.As(err, &ee) || ee.code != 1 || !strings.Contains(stderr, c.stderr) || strings.Contains(stderr, "saved study") {
				t.Errorf("err %v, stderr %q", err, stderr)
			}
		})
	}
	_, stderr, err = runCmd(t, "", "fit", "--save", "--server", base, "--api-key", "k-analyse-1", "--lambda", "-1", file)
	var ee exitError
	if !errors.As(err, &ee) || ee.code != 2 || !strings.Contains(stderr, "--lambda") {
		t.Errorf("bad option through the server: %v %q", err, stderr)
	}
	cancel()
	if err := <-done; err != nil {
		t.Error(err)
	}
}

// readBase reads the server's URL from its start-up lines.
func readBase(t *testing.T, r io.Reader) string {
	t.Helper()
	sc := bufio.NewScanner(r)
	for sc.Scan() {
		if _, u, ok := strings.Cut(sc.Text(), " listening on "); ok {
			go io.Copy(io.Discard, r)
			return u
		}
	}
	t.Fatal("the server did not start")
	return ""
}

// The record's flags without --save, or naming two places, are refused
// before anything is read or computed.
func TestSaveCLIBadFlags(t *testing.T) {
	const file = "../../testdata/demo-glucose.csv"
	cases := []struct {
		name   string
		args   []string
		stderr string
	}{
		{"label without save", []string{"fit", "--label", "x", file}, "--label describes a saved study"},
		{"tag without save", []string{"compare", "--tag", "a=b", file}, "--tag describes a saved study"},
		{"data dir without save", []string{"calibrate", "--data-dir", "d", file}, "--data-dir describes a saved study"},
		{"server without save", []string{"fit", "--server", "http://127.0.0.1:1", file}, "--server describes a saved study"},
		{"two places", []string{"fit", "--save", "--server", "http://127.0.0.1:1", "--data-dir", "d", file}, "give one"},
		{"key without server", []string{"fit", "--save", "--api-key", "k", "--data-dir", "d", file}, "--api-key is for --server"},
		{"bad server", []string{"fit", "--save", "--server", "ftp://h", file}, "--server"},
		{"tag without value", []string{"fit", "--save", "--tag", "analyte", file}, "KEY=VALUE"},
		{"tag key with colon", []string{"fit", "--save", "--tag", "a:b=c", file}, "KEY=VALUE"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, stderr, err := runCmd(t, "", c.args...)
			var ee exitError
			if !errors.As(err, &ee) || ee.code != 2 || !strings.Contains(stderr, c.stderr) {
				t.Errorf("err %v, stderr %q lacks %q", err, stderr, c.stderr)
			}
		})
	}
	if _, err := os.Stat("d"); err == nil {
		t.Error("a refused command created its data directory")
	}
}

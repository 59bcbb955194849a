package store

import (
	"bufio"
	"context"
	"database/sql"
	"errors"
	"fmt"
	"io"
	"net/url"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"

	"eivfit/eiv/study"
)

// The reliability tests run real processes: the test binary re-executed
// with EIVFIT_STORE_HELPER set runs one of the helpers below instead of
// the tests, against the store named by EIVFIT_STORE_HELPER_DIR or
// EIVFIT_STORE_HELPER_URL, and reports on standard output.

func TestMain(m *testing.M) {
	if h := os.Getenv("EIVFIT_STORE_HELPER"); h != "" {
		if err := runHelper(h); err != nil {
			fmt.Fprintln(os.Stderr, "helper:", err)
			os.Exit(1)
		}
		os.Exit(0)
	}
	code := m.Run()
	benchCleanup()
	os.Exit(code)
}

func runHelper(kind string) error {
	ctx := context.Background()
	s, err := Open(ctx, Config{DataDir: os.Getenv("EIVFIT_STORE_HELPER_DIR"), DatabaseURL: os.Getenv("EIVFIT_STORE_HELPER_URL")})
	if err != nil {
		return err
	}
	defer s.Close()
	out := bufio.NewWriter(os.Stdout)
	// Each line is flushed at once: a line the parent read is a save the
	// store acknowledged.
	say := func(format string, args ...any) {
		fmt.Fprintf(out, format+"\n", args...)
		out.Flush()
	}
	switch kind {
	case "save":
		// Saves sample(series, 0), sample(series, 1), … up to count (0:
		// until killed), printing "saved I ID" after each.
		series, _ := strconv.ParseUint(os.Getenv("EIVFIT_STORE_HELPER_SERIES"), 10, 64)
		count, _ := strconv.Atoi(os.Getenv("EIVFIT_STORE_HELPER_COUNT"))
		say("ready")
		for i := 0; count == 0 || i < count; i++ {
			st := sample(series, i)
			if err := s.Save(ctx, st); err != nil {
				return err
			}
			say("saved %d %s", i, st.ID)
		}
	case "revise":
		// Workers revise one study until it has `rounds` revisions, each
		// time based on the latest they saw, printing "won B WHO" or
		// "lost B" per attempt.
		id := os.Getenv("EIVFIT_STORE_HELPER_STUDY")
		rounds, _ := strconv.Atoi(os.Getenv("EIVFIT_STORE_HELPER_ROUNDS"))
		name := os.Getenv("EIVFIT_STORE_HELPER_NAME")
		var (
			mu   sync.Mutex
			wg   sync.WaitGroup
			fail error
		)
		// Start together with the other process: on "go" from the parent.
		say("ready")
		if l, _ := bufio.NewReader(os.Stdin).ReadString('\n'); l != "go\n" {
			return fmt.Errorf("expected go, read %q", l)
		}
		for w := range 4 {
			wg.Go(func() {
				who := fmt.Sprintf("%s-w%d", name, w)
				for {
					h, err := s.History(ctx, id)
					if err == nil && len(h)-1 >= rounds {
						return
					}
					if err == nil {
						b := len(h) - 1
						_, err = s.AddRevision(ctx, id, b, &study.Revision{Reason: "by " + who, Who: who})
						mu.Lock()
						switch {
						case err == nil:
							say("won %d %s", b, who)
						case errors.Is(err, study.ErrConflict):
							say("lost %d", b)
							err = nil
						}
						mu.Unlock()
					}
					if err != nil {
						mu.Lock()
						fail = err
						mu.Unlock()
						return
					}
				}
			})
		}
		wg.Wait()
		return fail
	default:
		return fmt.Errorf("unknown helper %q", kind)
	}
	return nil
}

// helper starts the test binary as helper kind against cfg.
func helper(t *testing.T, kind string, cfg Config, env ...string) (*exec.Cmd, io.ReadCloser) {
	cmd, out, _ := helperIn(t, kind, cfg, env...)
	return cmd, out
}

// helperIn is helper with the helper's standard input.
func helperIn(t *testing.T, kind string, cfg Config, env ...string) (*exec.Cmd, io.ReadCloser, io.WriteCloser) {
	t.Helper()
	cmd := exec.Command(os.Args[0], "-test.run=^$")
	cmd.Env = append(os.Environ(), "EIVFIT_STORE_HELPER="+kind,
		"EIVFIT_STORE_HELPER_DIR="+cfg.DataDir, "EIVFIT_STORE_HELPER_URL="+cfg.DatabaseURL)
	cmd.Env = append(cmd.Env, env...)
	cmd.Stderr = &testWriter{t: t, prefix: kind + ": "}
	out, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	in, err := cmd.StdinPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { cmd.Process.Kill(); cmd.Wait() })
	return cmd, out, in
}

type testWriter struct {
	t      *testing.T
	prefix string
}

func (w *testWriter) Write(p []byte) (int, error) {
	w.t.Log(w.prefix + strings.TrimSpace(string(p)))
	return len(p), nil
}

// acked reads "saved I ID" lines into acks until the stream ends.
func readAcks(r io.Reader, acks map[int]string, onLine func(n int)) error {
	sc := bufio.NewScanner(r)
	for sc.Scan() {
		f := strings.Fields(sc.Text())
		if len(f) == 1 && f[0] == "ready" {
			continue
		}
		if len(f) != 3 || f[0] != "saved" {
			return fmt.Errorf("helper said %q", sc.Text())
		}
		i, err := strconv.Atoi(f[1])
		if err != nil {
			return err
		}
		acks[i] = f[2]
		onLine(len(acks))
	}
	return sc.Err()
}

// checkAcked reopens the store and checks every acknowledged study.
func checkAcked(t *testing.T, cfg Config, series uint64, acks map[int]string) {
	t.Helper()
	s, err := Open(context.Background(), cfg)
	if err != nil {
		t.Fatalf("reopen: %v", err)
	}
	defer s.Close()
	ctx := context.Background()
	for i, id := range acks {
		got, err := s.Get(ctx, id)
		if err != nil {
			t.Fatalf("acknowledged study %d (%s): %v", i, id, err)
		}
		if err := sameContent(got, sample(series, i)); err != nil {
			t.Fatalf("acknowledged study %d (%s): %v", i, id, err)
		}
		chainOf(t, ctx, s, got)
	}
	page, _, err := s.List(ctx, study.Filter{Limit: study.MaxLimit})
	if err != nil {
		t.Fatal(err)
	}
	// At most the one save in flight at the kill may have landed
	// unacknowledged.
	if len(page) < len(acks) || len(page) > len(acks)+1 {
		t.Fatalf("%d studies stored, %d acknowledged", len(page), len(acks))
	}
}

func TestKillDuringSaves(t *testing.T) {
	const series, before = 900, 40
	eachEngine(t, func(t *testing.T, cfg Config) {
		cmd, out := helper(t, "save", cfg, "EIVFIT_STORE_HELPER_SERIES="+strconv.Itoa(series))
		acks := map[int]string{}
		killed := false
		err := readAcks(out, acks, func(n int) {
			if n == before && !killed {
				killed = true
				// SIGKILL: no deferred Close, no flush; the helper is
				// most likely inside a Save.
				if err := cmd.Process.Kill(); err != nil {
					t.Error(err)
				}
			}
		})
		if err != nil {
			t.Fatal(err)
		}
		werr := cmd.Wait()
		if !killed || werr == nil {
			t.Fatalf("the helper was not killed mid-stream (%d saves acknowledged, exit %v)", len(acks), werr)
		}
		t.Logf("%d saves acknowledged before the kill landed", len(acks))
		if cfg.DataDir != "" {
			checkSQLiteIntegrity(t, cfg.DataDir)
		}
		checkAcked(t, cfg, series, acks)
	})
}

// checkSQLiteIntegrity runs SQLite's own full check on the database file.
func checkSQLiteIntegrity(t *testing.T, dir string) {
	t.Helper()
	u := url.URL{Scheme: "file", OmitHost: true, Path: filepath.Join(dir, DatabaseFile)}
	d, err := sql.Open("sqlite", u.String())
	if err != nil {
		t.Fatal(err)
	}
	defer d.Close()
	var res string
	if err := d.QueryRow("PRAGMA integrity_check").Scan(&res); err != nil || res != "ok" {
		t.Fatalf("integrity_check: %q %v", res, err)
	}
}

func TestTwoProcessesSave(t *testing.T) {
	const each = 25
	eachEngine(t, func(t *testing.T, cfg Config) {
		if _, err := Open(context.Background(), cfg); err != nil { // migrate once first
			t.Fatal(err)
		}
		type result struct {
			acks map[int]string
			err  error
		}
		res := make([]result, 2)
		var wg sync.WaitGroup
		for p := range 2 {
			cmd, out := helper(t, "save", cfg, fmt.Sprintf("EIVFIT_STORE_HELPER_SERIES=%d", 910+p),
				"EIVFIT_STORE_HELPER_COUNT="+strconv.Itoa(each))
			wg.Go(func() {
				res[p].acks = map[int]string{}
				if err := readAcks(out, res[p].acks, func(int) {}); err != nil {
					res[p].err = err
				}
				if err := cmd.Wait(); err != nil {
					res[p].err = err
				}
			})
		}
		wg.Wait()
		for p := range 2 {
			if res[p].err != nil || len(res[p].acks) != each {
				t.Fatalf("process %d: %d saves, %v", p, len(res[p].acks), res[p].err)
			}
		}
		s := mustOpen(t, cfg)
		page, _, err := s.List(context.Background(), study.Filter{Limit: study.MaxLimit})
		if err != nil || len(page) != 2*each {
			t.Fatalf("%d studies listed, want %d (%v)", len(page), 2*each, err)
		}
		for p := range 2 {
			for i, id := range res[p].acks {
				got, err := s.Get(context.Background(), id)
				if err != nil {
					t.Fatal(err)
				}
				if err := sameContent(got, sample(uint64(910+p), i)); err != nil {
					t.Fatalf("process %d study %d: %v", p, i, err)
				}
			}
		}
	})
}

func TestTwoProcessesRevise(t *testing.T) {
	const rounds = 30
	eachEngine(t, func(t *testing.T, cfg Config) {
		s := mustOpen(t, cfg)
		ctx := context.Background()
		st := sample(920, 0)
		if err := s.Save(ctx, st); err != nil {
			t.Fatal(err)
		}
		var (
			mu     sync.Mutex
			wins   = map[int][]string{}
			lost   int
			wg     sync.WaitGroup
			procs  []*exec.Cmd
			inputs []io.WriteCloser
			ready  sync.WaitGroup
		)
		for p := range 2 {
			cmd, out, in := helperIn(t, "revise", cfg, "EIVFIT_STORE_HELPER_STUDY="+st.ID,
				"EIVFIT_STORE_HELPER_ROUNDS="+strconv.Itoa(rounds), fmt.Sprintf("EIVFIT_STORE_HELPER_NAME=p%d", p))
			procs, inputs = append(procs, cmd), append(inputs, in)
			ready.Add(1)
			wg.Go(func() {
				sc := bufio.NewScanner(out)
				if !sc.Scan() || sc.Text() != "ready" {
					t.Errorf("process %d did not start", p)
					ready.Done()
					return
				}
				ready.Done()
				for sc.Scan() {
					f := strings.Fields(sc.Text())
					mu.Lock()
					switch {
					case len(f) == 3 && f[0] == "won":
						b, _ := strconv.Atoi(f[1])
						wins[b] = append(wins[b], f[2])
					case len(f) == 2 && f[0] == "lost":
						lost++
					default:
						t.Errorf("helper said %q", sc.Text())
					}
					mu.Unlock()
				}
			})
		}
		ready.Wait()
		for _, in := range inputs {
			io.WriteString(in, "go\n")
		}
		wg.Wait()
		for p, cmd := range procs {
			if err := cmd.Wait(); err != nil {
				t.Fatalf("process %d: %v", p, err)
			}
		}
		h := chainOf(t, ctx, s, st)
		if len(h) != rounds+1 {
			t.Fatalf("%d revisions, want %d", len(h), rounds+1)
		}
		procsWon := map[byte]bool{}
		for b := range rounds {
			if len(wins[b]) != 1 {
				t.Fatalf("based_on %d: winners %v, want exactly one", b, wins[b])
			}
			if h[b+1].Who != wins[b][0] {
				t.Fatalf("revision %d by %s, but %s was told it won", b+1, h[b+1].Who, wins[b][0])
			}
			procsWon[wins[b][0][1]] = true
		}
		t.Logf("%d revisions, %d conflicts refused, winners from %d processes", rounds, lost, len(procsWon))
	})
}

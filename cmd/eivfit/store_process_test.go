package main

import (
	"bytes"
	"context"
	"database/sql"
	"encoding/json"
	"fmt"
	"net"
	"net/url"
	"os"
	"os/exec"
	"os/user"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"eivfit/api/store"
	"eivfit/api/store/storetest"
	"eivfit/api/wire"
)

// Real `eivfit serve` processes on a study store: two servers on one
// PostgreSQL, kill -9 during a stream of saves, and the database going
// down and coming back. They skip under -short and -race (slow, and not
// about data races), and on PostgreSQL without EIVFIT_TEST_DATABASE_URL
// (failing under EIVFIT_REQUIRE_DATABASE=1, as in CI).

func skipProcessTest(t *testing.T) {
	t.Helper()
	if testing.Short() {
		t.Skip("starts server processes")
	}
	if raceEnabled {
		t.Skip("server processes under the race detector are too slow")
	}
}

// storeEnv is how a server process is pointed at cfg's store.
func storeEnv(cfg store.Config) (env, args []string) {
	if cfg.DatabaseURL != "" {
		return []string{"EIVFIT_DATABASE_URL=" + cfg.DatabaseURL}, nil
	}
	return []string{"EIVFIT_DATABASE_URL="}, []string{"--data-dir", cfg.DataDir}
}

// waitReady waits until /readyz answers 200 (the store is open).
func waitReady(t *testing.T, p *serveProcess) {
	t.Helper()
	deadline := time.Now().Add(20 * time.Second)
	for {
		code, _, _ := do(t, "GET", p.base+"/readyz", "", "", nil)
		if code == 200 {
			return
		}
		if time.Now().After(deadline) {
			t.Fatalf("%s not ready within 20 s (last %d)", p.base, code)
		}
		time.Sleep(50 * time.Millisecond)
	}
}

// fitBody is a small JSON fit, different for every i.
func fitBody(i int) []byte {
	var b strings.Builder
	b.WriteString(`{"points":[`)
	for k := range 12 {
		if k > 0 {
			b.WriteByte(',')
		}
		fmt.Fprintf(&b, `{"x":%d,"y":%g}`, k+1, 2*float64(k+1)+0.37*float64((7*k+i)%5)+float64(i)/1000)
	}
	b.WriteString(`],"methods":["ols","deming"]}`)
	return []byte(b.String())
}

// ack is a save the server acknowledged with 201.
type ack struct {
	id           string
	body, result []byte
}

// saveFit posts fitBody(i) with save=true; ok when the answer is 201.
func saveFit(t *testing.T, base string, i int) (a ack, code int) {
	body := fitBody(i)
	code, _, b := do(t, "POST", base+"/v1/fit?save=true&label=stream&tag=n:"+strconv.Itoa(i), "application/json", "", body)
	if code != 201 {
		return a, code
	}
	var c wire.Created
	if err := json.Unmarshal(b, &c); err != nil || c.ID == "" {
		t.Errorf("201 without a study: %v %.200s", err, b)
		return a, -2
	}
	return ack{id: c.ID, body: body, result: c.Result}, code
}

// checkAcked reads every acknowledged study back through base: its
// result, its input byte for byte, and its hash chain.
func checkAcked(t *testing.T, base string, acks []ack) {
	t.Helper()
	for _, a := range acks {
		code, _, b := do(t, "GET", base+"/v1/studies/"+a.id, "", "", nil)
		var st wire.StudyOut
		if code != 200 || json.Unmarshal(b, &st) != nil {
			t.Errorf("study %s: %d %.200s", a.id, code, b)
			continue
		}
		if !bytes.Equal(st.Result, a.result) {
			t.Errorf("study %s: stored result differs from the acknowledged one", a.id)
		}
		if code, _, in := do(t, "GET", base+"/v1/studies/"+a.id+"/input", "", "", nil); code != 200 || !bytes.Equal(in, a.body) {
			t.Errorf("study %s: input %d, %d bytes, want %d", a.id, code, len(in), len(a.body))
		}
		code, _, h := do(t, "GET", base+"/v1/studies/"+a.id+"/history", "", "", nil)
		var hist struct{ Chain string }
		if code != 200 || json.Unmarshal(h, &hist) != nil || hist.Chain != "valid" {
			t.Errorf("study %s: history %d chain %q", a.id, code, hist.Chain)
		}
	}
}

// verifyAll runs `eivfit studies verify` on the store: every study found
// (acknowledged or not) recomputes to its stored result.
func verifyAll(t *testing.T, cfg store.Config, atLeast int) {
	t.Helper()
	args := []string{"studies", "verify"}
	if cfg.DatabaseURL != "" {
		t.Setenv("EIVFIT_DATABASE_URL", cfg.DatabaseURL)
	} else {
		args = append(args, "--data-dir", cfg.DataDir)
	}
	out, stderr, err := runCmd(t, "", args...)
	var n, bad int
	if _, serr := fmt.Sscanf(out[strings.LastIndex(strings.TrimSpace(out), "\n")+1:], "%d studies checked, %d mismatched", &n, &bad); err != nil || serr != nil || bad != 0 || n < atLeast {
		t.Errorf("studies verify: %v (%d checked, %d mismatched, want at least %d)\n%.500s%s", err, n, bad, atLeast, out, stderr)
	}
}

// Two server processes on one PostgreSQL database, started together (the
// migrations run once under the advisory lock): saves from both at once
// are all stored and intact, each readable through the other server; and
// of revisions of one study sent at once through both servers with the
// same based_on exactly one is created and the others get 409, round
// after round.
func TestTwoServersOnePostgres(t *testing.T) {
	skipProcessTest(t)
	cfg := storetest.Postgres(t)
	env, _ := storeEnv(cfg)
	var procs [2]*serveProcess
	var wg sync.WaitGroup
	for i := range procs {
		wg.Go(func() { procs[i] = startServe(t, env) })
	}
	wg.Wait()
	if t.Failed() {
		t.FailNow()
	}
	for _, p := range procs {
		waitReady(t, p)
	}

	const writers, each = 4, 10 // per server
	var mu sync.Mutex
	var acks []ack
	for s, p := range procs {
		for w := range writers {
			wg.Go(func() {
				for k := range each {
					a, code := saveFit(t, p.base, (s*writers+w)*each+k)
					if code != 201 {
						t.Errorf("server %d: save answered %d", s, code)
						continue
					}
					mu.Lock()
					acks = append(acks, a)
					mu.Unlock()
				}
			})
		}
	}
	wg.Wait()
	if len(acks) != 2*writers*each {
		t.Fatalf("%d saves acknowledged, want %d", len(acks), 2*writers*each)
	}
	checkAcked(t, procs[1].base, acks[:len(acks)/2])
	checkAcked(t, procs[0].base, acks[len(acks)/2:])
	code, _, b := do(t, "GET", procs[0].base+"/v1/studies?label=stream&limit=200", "", "", nil)
	var list wire.StudyList
	if code != 200 || json.Unmarshal(b, &list) != nil || len(list.Studies) != len(acks) {
		t.Errorf("listing: %d, %d studies, want %d", code, len(list.Studies), len(acks))
	}

	id := acks[0].id
	const contenders, rounds = 6, 4 // alternating between the servers
	var winners []string
	for n := range rounds {
		start := make(chan struct{})
		codes := make([]int, contenders)
		for c := range contenders {
			wg.Go(func() {
				body := fmt.Sprintf(`{"reason":"round %d, contender %d","based_on":%d,"exclude":[{"id":"%d","reason":"suspect reading"}]}`, n, c, n, c+1)
				<-start
				codes[c], _, _ = do(t, "POST", procs[c%2].base+"/v1/studies/"+id+"/revisions", "application/json", "", []byte(body))
			})
		}
		close(start)
		wg.Wait()
		won := -1
		for c, code := range codes {
			switch {
			case code == 201 && won < 0:
				won = c
			case code == 201:
				t.Errorf("round %d: contenders %d and %d both created revision %d", n, won, c, n+1)
			case code != 409:
				t.Errorf("round %d: contender %d got %d, want 201 or 409", n, c, code)
			}
		}
		if won < 0 {
			t.Fatalf("round %d: no revision created (%v)", n, codes)
		}
		winners = append(winners, fmt.Sprintf("round %d, contender %d", n, won))
	}
	code, _, b = do(t, "GET", procs[1].base+"/v1/studies/"+id+"/history", "", "", nil)
	var hist struct {
		Chain     string
		Revisions []struct {
			Number int
			Reason string
		}
	}
	if code != 200 || json.Unmarshal(b, &hist) != nil || hist.Chain != "valid" || len(hist.Revisions) != rounds+1 {
		t.Fatalf("history: %d chain %q, %d revisions, want %d", code, hist.Chain, len(hist.Revisions), rounds+1)
	}
	for n, w := range winners {
		if r := hist.Revisions[n+1]; r.Number != n+1 || r.Reason != w {
			t.Errorf("revision %d: %q, the 201 went to %q", r.Number, r.Reason, w)
		}
	}
	verifyAll(t, cfg, len(acks))
}

// kill -9 during a stream of saves, on each engine: every save answered
// 201 is intact and readable after a restart, SQLite's integrity check
// passes on the file as the kill left it, the restarted server opens the
// store and is ready, and every study in it (acknowledged or not)
// recomputes to its stored result.
func TestKillDuringSaves(t *testing.T) {
	skipProcessTest(t)
	for _, e := range storetest.Engines {
		t.Run(e.Name, func(t *testing.T) {
			cfg := e.Config(t)
			env, args := storeEnv(cfg)
			p := startServe(t, env, args...)
			waitReady(t, p)
			var (
				mu   sync.Mutex
				acks []ack
				wg   sync.WaitGroup
				next = make(chan int)
				stop = make(chan struct{})
			)
			go func() {
				for i := 0; ; i++ {
					select {
					case next <- i:
					case <-stop:
						close(next)
						return
					}
				}
			}()
			for range 4 {
				wg.Go(func() {
					for i := range next {
						a, code := saveFit(t, p.base, i)
						if code == 201 {
							mu.Lock()
							acks = append(acks, a)
							mu.Unlock()
						}
					}
				})
			}
			deadline := time.Now().Add(5 * time.Second)
			for {
				mu.Lock()
				n := len(acks)
				mu.Unlock()
				if n >= 60 || time.Now().After(deadline) {
					break
				}
				time.Sleep(5 * time.Millisecond)
			}
			p.kill() // SIGKILL while the writers are still sending
			close(stop)
			wg.Wait()
			if len(acks) == 0 {
				t.Fatal("no save was acknowledged before the kill")
			}
			t.Logf("%d saves acknowledged before the kill", len(acks))
			if cfg.DataDir != "" {
				u := url.URL{Scheme: "file", OmitHost: true, Path: filepath.Join(cfg.DataDir, store.DatabaseFile)}
				d, err := sql.Open("sqlite", u.String())
				if err != nil {
					t.Fatal(err)
				}
				var res string
				if err := d.QueryRow("PRAGMA integrity_check").Scan(&res); err != nil || res != "ok" {
					t.Errorf("integrity_check after the kill: %q %v", res, err)
				}
				d.Close()
			}
			q := startServe(t, env, args...)
			waitReady(t, q)
			checkAcked(t, q.base, acks)
			verifyAll(t, cfg, len(acks))
		})
	}
}

// The database stops while a server runs: the store routes answer 503
// with Retry-After, /readyz 503, and computations without save keep
// answering 200; when the database is back the store routes answer again,
// from the same server process. The test runs its own PostgreSQL cluster
// (Debian's binaries, as .ci/postgres.sh), since stopping the shared one
// would fail the tests running beside it.
func TestDatabaseDownAndBack(t *testing.T) {
	skipProcessTest(t)
	pg := startCluster(t)
	p := startServe(t, []string{"EIVFIT_DATABASE_URL=" + pg.url()})
	waitReady(t, p)
	before, code := saveFit(t, p.base, 1)
	if code != 201 {
		t.Fatalf("save with the database up: %d", code)
	}
	pg.ctl(t, "stop", "-m", "fast")

	plain := fitBody(2)
	checks := []struct {
		name, method, path string
		body               []byte
		want               int
	}{
		{"save", "POST", "/v1/fit?save=true", plain, 503},
		{"read a study", "GET", "/v1/studies/" + before.id, nil, 503},
		{"list", "GET", "/v1/studies", nil, 503},
		{"revise", "POST", "/v1/studies/" + before.id + "/revisions", []byte(`{"reason":"r","based_on":0,"exclude":[{"id":"2","reason":"r"}]}`), 503},
		{"readiness", "GET", "/readyz", nil, 503},
		{"fit without save", "POST", "/v1/fit", plain, 200},
		{"liveness", "GET", "/healthz", nil, 200},
	}
	for _, c := range checks {
		t.Run(c.name, func(t *testing.T) {
			ct := ""
			if c.body != nil {
				ct = "application/json"
			}
			code, h, b := do(t, c.method, p.base+c.path, ct, "", c.body)
			if code != c.want {
				t.Fatalf("%d, want %d: %.300s", code, c.want, b)
			}
			if code == 503 && c.path != "/readyz" {
				if ra, err := strconv.Atoi(h.Get("Retry-After")); err != nil || ra < 1 {
					t.Errorf("Retry-After %q", h.Get("Retry-After"))
				}
				if mt := h.Get("Content-Type"); !strings.HasPrefix(mt, "application/problem+json") {
					t.Errorf("content type %q", mt)
				}
			}
		})
	}

	pg.ctl(t, "start", "-w", "-t", "60", "-l", filepath.Join(pg.dir, "server.log"), "-o", pg.options())
	deadline := time.Now().Add(20 * time.Second)
	for {
		code, _, _ := do(t, "GET", p.base+"/v1/studies/"+before.id, "", "", nil)
		if code == 200 {
			break
		}
		if time.Now().After(deadline) {
			t.Fatalf("the store routes did not recover within 20 s of the database's return (last %d)", code)
		}
		time.Sleep(100 * time.Millisecond)
	}
	checkAcked(t, p.base, []ack{before})
	after, code := saveFit(t, p.base, 3)
	if code != 201 {
		t.Fatalf("save after the database came back: %d", code)
	}
	checkAcked(t, p.base, []ack{after})
	if code, _, _ := do(t, "GET", p.base+"/readyz", "", "", nil); code != 200 {
		t.Errorf("/readyz %d after the database came back", code)
	}
	select {
	case err := <-p.done:
		t.Fatalf("the server exited (%v): it was to recover in place", err)
	default:
	}
}

// cluster is a PostgreSQL cluster of the test's own.
type cluster struct {
	bin, dir string
	port     int
	cred     *syscall.Credential // the postgres user's, when the test runs as root
}

// startCluster initialises and starts a cluster on a free local port with
// Debian's PostgreSQL binaries; it is stopped and removed at the end.
// Without EIVFIT_TEST_DATABASE_URL (no PostgreSQL here) the test skips,
// failing under EIVFIT_REQUIRE_DATABASE=1.
func startCluster(t *testing.T) *cluster {
	t.Helper()
	required := os.Getenv("EIVFIT_REQUIRE_DATABASE") == "1"
	if os.Getenv("EIVFIT_TEST_DATABASE_URL") == "" && !required {
		t.Skip("EIVFIT_TEST_DATABASE_URL not set")
	}
	bins, _ := filepath.Glob("/usr/lib/postgresql/*/bin/pg_ctl")
	slices.SortFunc(bins, func(a, b string) int { return pgMajor(a) - pgMajor(b) })
	if len(bins) == 0 {
		if required {
			t.Fatal("EIVFIT_REQUIRE_DATABASE=1 but Debian's PostgreSQL binaries (/usr/lib/postgresql/*/bin) are missing")
		}
		t.Skip("no PostgreSQL binaries in /usr/lib/postgresql/*/bin")
	}
	c := &cluster{bin: filepath.Dir(bins[len(bins)-1])}
	dir, err := os.MkdirTemp("", "eivfit-pg-down-")
	if err != nil {
		t.Fatal(err)
	}
	c.dir = dir
	t.Cleanup(func() {
		c.run("pg_ctl", "-D", filepath.Join(c.dir, "data"), "-m", "immediate", "stop")
		os.RemoveAll(c.dir)
	})
	if os.Geteuid() == 0 { // PostgreSQL refuses to run as root
		u, err := user.Lookup("postgres")
		if err != nil {
			t.Fatalf("running as root, and no postgres user: %v", err)
		}
		uid, _ := strconv.Atoi(u.Uid)
		gid, _ := strconv.Atoi(u.Gid)
		c.cred = &syscall.Credential{Uid: uint32(uid), Gid: uint32(gid)}
		if err := os.Chown(dir, uid, gid); err != nil {
			t.Fatal(err)
		}
	}
	if err := os.Mkdir(filepath.Join(dir, "sock"), 0o700); err != nil {
		t.Fatal(err)
	}
	if c.cred != nil {
		os.Chown(filepath.Join(dir, "sock"), int(c.cred.Uid), int(c.cred.Gid))
	}
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	c.port = ln.Addr().(*net.TCPAddr).Port
	ln.Close()
	if out, err := c.run("initdb", "-D", filepath.Join(dir, "data"), "-A", "trust", "-U", "postgres", "--no-sync"); err != nil {
		t.Fatalf("initdb: %v\n%s", err, out)
	}
	c.ctl(t, "start", "-w", "-t", "60", "-l", filepath.Join(dir, "server.log"), "-o", c.options())
	return c
}

func pgMajor(path string) int {
	n, _ := strconv.Atoi(filepath.Base(filepath.Dir(filepath.Dir(path))))
	return n
}

func (c *cluster) options() string {
	return fmt.Sprintf("-p %d -k %s -c listen_addresses=127.0.0.1 -c fsync=off", c.port, filepath.Join(c.dir, "sock"))
}

func (c *cluster) url() string {
	return fmt.Sprintf("postgres://postgres@127.0.0.1:%d/postgres?sslmode=disable", c.port)
}

func (c *cluster) run(name string, args ...string) ([]byte, error) {
	ctx, cancel := context.WithTimeout(context.Background(), 90*time.Second)
	defer cancel()
	cmd := exec.CommandContext(ctx, filepath.Join(c.bin, name), args...)
	cmd.Dir = c.dir
	if c.cred != nil {
		cmd.SysProcAttr = &syscall.SysProcAttr{Credential: c.cred}
	}
	return cmd.CombinedOutput()
}

// ctl runs pg_ctl COMMAND on the cluster.
func (c *cluster) ctl(t *testing.T, command string, args ...string) {
	t.Helper()
	if out, err := c.run("pg_ctl", append([]string{"-D", filepath.Join(c.dir, "data"), command}, args...)...); err != nil {
		log, _ := os.ReadFile(filepath.Join(c.dir, "server.log"))
		t.Fatalf("pg_ctl %s: %v\n%s\n%s", command, err, out, log)
	}
}

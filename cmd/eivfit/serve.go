package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"net"
	"os"
	"path/filepath"
	"runtime/debug"
	"strconv"
	"strings"
	"time"

	"eivfit/api"
	"eivfit/api/store"
	"eivfit/eiv/study"
)

// serveFlags binds every setting to a flag whose default comes from an
// EIVFIT_* variable, so that both are listed by `eivfit serve --help`.
type serveFlags struct {
	fs   *flag.FlagSet
	errs []error
}

func (f *serveFlags) env(name string) (string, bool) { return os.LookupEnv("EIVFIT_" + name) }

func (f *serveFlags) str(p *string, flagName, env, def, usage string) {
	if v, ok := f.env(env); ok {
		def = v
	}
	f.fs.StringVar(p, flagName, def, usage+" (env EIVFIT_"+env+")")
}

func (f *serveFlags) int(p *int, flagName, env string, def int, usage string) {
	if v, ok := f.env(env); ok {
		n, err := strconv.Atoi(v)
		if err != nil {
			f.errs = append(f.errs, fmt.Errorf("EIVFIT_%s=%q is not an integer", env, v))
		}
		def = n
	}
	f.fs.IntVar(p, flagName, def, usage+" (env EIVFIT_"+env+")")
}

func (f *serveFlags) dur(p *time.Duration, flagName, env string, def time.Duration, usage string) {
	if v, ok := f.env(env); ok {
		d, err := time.ParseDuration(v)
		if err != nil {
			f.errs = append(f.errs, fmt.Errorf("EIVFIT_%s=%q is not a duration such as 60s", env, v))
		}
		def = d
	}
	f.fs.DurationVar(p, flagName, def, usage+" (env EIVFIT_"+env+")")
}

func runServe(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("serve", flag.ContinueOnError)
	fs.SetOutput(stderr)
	sf := &serveFlags{fs: fs}
	d := api.DefaultConfig
	var cfg api.Config
	var bodyMiB, storedMiB int
	var keysFile, logLevel, dataDir string
	sf.str(&cfg.Addr, "addr", "ADDR", d.Addr, "listen address")
	sf.str(&cfg.MetricsAddr, "metrics-addr", "METRICS_ADDR", "", "serve /metrics on this separate address, without a key, instead of the main one (where it needs a key when keys are set)")
	sf.int(&bodyMiB, "max-body-mib", "MAX_BODY_MIB", int(d.MaxBodyBytes>>20), "largest request body, MiB")
	sf.int(&storedMiB, "max-stored-mib", "MAX_STORED_MIB", int(d.MaxStoredBytes>>20), "largest body of a saved study, MiB (a larger save is refused with 413)")
	sf.int(&cfg.Limits.MaxPoints, "max-points", "MAX_POINTS", d.Limits.MaxPoints, "most points per dataset")
	sf.int(&cfg.Limits.MaxResamples, "max-resamples", "MAX_RESAMPLES", d.Limits.MaxResamples, "most bootstrap resamples per fit")
	sf.int(&cfg.Limits.MaxAt, "max-at", "MAX_AT", d.Limits.MaxAt, "most x values in \"at\"")
	sf.int(&cfg.MaxBatch, "max-batch", "MAX_BATCH", d.MaxBatch, "most datasets per batch")
	sf.dur(&cfg.RequestTimeout, "request-timeout", "REQUEST_TIMEOUT", d.RequestTimeout, "deadline of one computation")
	sf.int(&cfg.Slots, "slots", "SLOTS", 0, "computations at once (0 = GOMAXPROCS)")
	sf.dur(&cfg.SlotWait, "slot-wait", "SLOT_WAIT", d.SlotWait, "how long a request waits for a compute slot before 503")
	sf.dur(&cfg.ReadHeaderTimeout, "read-header-timeout", "READ_HEADER_TIMEOUT", d.ReadHeaderTimeout, "time to read request headers")
	sf.dur(&cfg.ReadTimeout, "read-timeout", "READ_TIMEOUT", d.ReadTimeout, "time to read a whole request (a body not complete by then is answered 408)")
	sf.dur(&cfg.WriteTimeout, "write-timeout", "WRITE_TIMEOUT", d.WriteTimeout, "time to write a response")
	sf.dur(&cfg.IdleTimeout, "idle-timeout", "IDLE_TIMEOUT", d.IdleTimeout, "keep-alive idle time")
	sf.dur(&cfg.BodyIdleTimeout, "body-idle-timeout", "BODY_IDLE_TIMEOUT", d.BodyIdleTimeout, "answer 408 to a request body from which no byte arrives for this long")
	sf.dur(&cfg.ShutdownTimeout, "shutdown-timeout", "SHUTDOWN_TIMEOUT", d.ShutdownTimeout, "drain time on SIGTERM/SIGINT")
	sf.str(&keysFile, "api-keys-file", "API_KEYS_FILE", "", "file of API keys (one per line, KEY or sha256:HEX); when set, /v1/* and /metrics on the main address need \"Authorization: Bearer KEY\"")
	sf.str(&dataDir, "data-dir", "DATA_DIR", "./eivfit-data", "directory of the embedded SQLite study store, created on first start (not used when EIVFIT_DATABASE_URL names a PostgreSQL database, which is read from the environment only, so that its password never shows in a process list)")
	sf.str(&logLevel, "log-level", "LOG_LEVEL", "info", "log level: debug, info, warn, error")
	var gcPercent int
	sf.int(&gcPercent, "gc-percent", "GC_PERCENT", 400, "garbage-collector target (GOGC): the live heap of small requests is tiny, so the Go default of 100 collects very often; set GOMEMLIMIT (or the container's memory limit) to bound the heap")
	fs.Usage = func() {
		fmt.Fprint(stderr, "Usage: eivfit serve [flags]\n\nRuns the HTTP service. Every flag can also be set by the EIVFIT_* variable named with it.\n\nFlags:\n")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return nil
		}
		return exitError{2}
	}
	if len(sf.errs) > 0 {
		for _, e := range sf.errs {
			fmt.Fprintln(stderr, "eivfit serve:", e)
		}
		return exitError{2}
	}
	if fs.NArg() > 0 {
		fmt.Fprintf(stderr, "eivfit serve: unexpected argument %q\n", fs.Arg(0))
		return exitError{2}
	}
	cfg.MaxBodyBytes = int64(bodyMiB) << 20
	cfg.MaxStoredBytes = int64(storedMiB) << 20
	if _, set := os.LookupEnv("GOGC"); !set && gcPercent > 0 {
		debug.SetGCPercent(gcPercent)
	}
	cfg.Version, cfg.VCSRevision = buildVersion()
	dbURL := os.Getenv("EIVFIT_DATABASE_URL")
	cfg.OpenStore = func(ctx context.Context, observe func(string, time.Duration, error)) (study.Store, error) {
		return store.Open(ctx, store.Config{DatabaseURL: dbURL, DataDir: dataDir, Observe: observe})
	}
	var level slog.Level
	if err := level.UnmarshalText([]byte(logLevel)); err != nil {
		fmt.Fprintf(stderr, "eivfit serve: --log-level %q: use debug, info, warn or error\n", logLevel)
		return exitError{2}
	}
	cfg.Logger = slog.New(slog.NewJSONHandler(stderr, &slog.HandlerOptions{Level: level}))
	if keysFile != "" {
		f, err := os.Open(keysFile)
		if err != nil {
			fmt.Fprintln(stderr, "eivfit serve:", err)
			return exitError{2}
		}
		cfg.APIKeys, err = api.ReadAPIKeys(f)
		f.Close()
		if err != nil || len(cfg.APIKeys) == 0 {
			fmt.Fprintf(stderr, "eivfit serve: %s holds no API key\n", keysFile)
			return exitError{2}
		}
	}
	srv, err := api.NewServer(cfg)
	if err != nil {
		fmt.Fprintln(stderr, "eivfit serve:", err)
		return exitError{2}
	}
	defer srv.Close()
	ln, err := net.Listen("tcp", cfg.Addr)
	if err != nil {
		fmt.Fprintln(stderr, "eivfit serve:", err)
		return exitError{1}
	}
	var mln net.Listener
	if cfg.MetricsAddr != "" {
		if mln, err = net.Listen("tcp", cfg.MetricsAddr); err != nil {
			ln.Close()
			fmt.Fprintln(stderr, "eivfit serve:", err)
			return exitError{1}
		}
	}
	base := "http://" + displayAddr(ln.Addr().String())
	auth := ""
	if len(cfg.APIKeys) > 0 {
		auth = " -H 'Authorization: Bearer YOUR_KEY'"
	}
	fmt.Fprintf(stdout, "eivfit %s listening on %s\n", cfg.Version, base)
	if dbURL != "" {
		fmt.Fprintln(stdout, "Studies are saved in PostgreSQL (EIVFIT_DATABASE_URL).")
	} else {
		fmt.Fprintf(stdout, "Studies are saved in %s (add save=true to a request).\n", filepath.Join(dataDir, "eivfit.db"))
	}
	fmt.Fprintf(stdout, "Try the demo (a synthetic glucose analyser swap):\n  curl -s %s/demo/demo-glucose.csv | curl -s%s -H 'Content-Type: text/csv' --data-binary @- '%s/v1/fit?at=7,11.1'\n", base, auth, base)
	fmt.Fprintf(stdout, "API contract: %s/openapi.yaml\n", base)
	return srv.Serve(ctx, ln, mln)
}

// displayAddr turns a wildcard listen address into one a client can use.
func displayAddr(a string) string {
	host, port, err := net.SplitHostPort(a)
	if err != nil {
		return a
	}
	if host == "" || host == "0.0.0.0" || host == "::" {
		host = "127.0.0.1"
	}
	if strings.Contains(host, ":") {
		host = "[" + host + "]"
	}
	return host + ":" + port
}

// buildVersion is the version stored with every study and shown in
// reports: the one stamped with -ldflags "-X main.version=…", else the
// module version the go command stamps from the VCS (go build in a git
// checkout gives a pseudo-version, or the tag); and the VCS revision
// ("-dirty" when built from modified files). "dev" only remains for a
// build outside any VCS checkout, such as go test.
func buildVersion() (ver, rev string) {
	ver, rev = version, revision
	bi, ok := debug.ReadBuildInfo()
	if !ok || rev != "" {
		return ver, rev
	}
	if ver == "dev" && bi.Main.Version != "" && bi.Main.Version != "(devel)" {
		ver = bi.Main.Version
	}
	dirty := false
	for _, s := range bi.Settings {
		switch s.Key {
		case "vcs.revision":
			rev = s.Value
		case "vcs.modified":
			dirty = s.Value == "true"
		}
	}
	if rev != "" && dirty {
		rev += "-dirty"
	}
	return ver, rev
}

package api

import (
	"context"
	"crypto/rand"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"mime"
	"net"
	"net/http"
	"net/url"
	"os"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync/atomic"
	"time"

	"eivfit/api/report"

	"github.com/gin-gonic/gin"
	"github.com/prometheus/client_golang/prometheus/promhttp"
)

// Config is the service's configuration. The zero value of a field means
// its documented default (DefaultConfig).
type Config struct {
	Addr string // listen address; default 127.0.0.1:8080
	// MetricsAddr, when set, serves /metrics on a separate listener instead
	// of the main one.
	MetricsAddr string
	// MaxBodyBytes bounds a request body; default 64 MiB.
	MaxBodyBytes int64
	Limits       Limits
	// RequestTimeout is the deadline of one computation; default 60 s.
	RequestTimeout time.Duration
	// Slots is the number of computations run at once; default GOMAXPROCS.
	Slots int
	// SlotWait is how long a request waits for a free slot before a 503;
	// default 2 s.
	SlotWait time.Duration
	// MaxBatch bounds the datasets of one batch request; default 1000.
	MaxBatch int
	// MaxInFlightBytes bounds the request-body bytes held in memory at
	// once, so that memory stays bounded however many large requests
	// arrive. A body is charged as its bytes arrive (in 256 KiB steps),
	// not for its declared length, so idle uploads hold next to nothing;
	// a body that cannot get budget within SlotWait gets 503.
	// Default 4 × MaxBodyBytes.
	MaxInFlightBytes int64
	// ReadHeaderTimeout, ReadTimeout, WriteTimeout, IdleTimeout protect
	// against slow clients; defaults 5 s, 60 s, 120 s, 120 s. A body not
	// complete within ReadTimeout is answered 408.
	ReadHeaderTimeout, ReadTimeout, WriteTimeout, IdleTimeout time.Duration
	// BodyIdleTimeout answers 408 to a body from which no byte arrives for
	// this long; default 10 s.
	BodyIdleTimeout time.Duration
	// ShutdownTimeout bounds the drain on SIGTERM; default 90 s.
	ShutdownTimeout time.Duration
	// APIKeys, when not empty, are required as "Authorization: Bearer KEY"
	// on /v1/*; each entry is a key or its SHA-256 in hex.
	APIKeys []string
	// Logger receives one line per request (never request data); default
	// JSON on stderr.
	Logger *slog.Logger
	// Version is reported in reports and /healthz.
	Version string
}

// DefaultConfig holds the defaults, documented in `eivfit serve --help`
// and the OpenAPI document.
var DefaultConfig = Config{
	Addr:              "127.0.0.1:8080",
	MaxBodyBytes:      64 << 20,
	Limits:            DefaultLimits,
	RequestTimeout:    60 * time.Second,
	SlotWait:          2 * time.Second,
	MaxBatch:          1000,
	ReadHeaderTimeout: 5 * time.Second,
	ReadTimeout:       60 * time.Second,
	WriteTimeout:      120 * time.Second,
	IdleTimeout:       120 * time.Second,
	BodyIdleTimeout:   10 * time.Second,
	ShutdownTimeout:   90 * time.Second,
}

func (c Config) withDefaults() Config {
	d := DefaultConfig
	if c.Addr == "" {
		c.Addr = d.Addr
	}
	if c.MaxBodyBytes <= 0 {
		c.MaxBodyBytes = d.MaxBodyBytes
	}
	if c.Limits.MaxPoints <= 0 {
		c.Limits.MaxPoints = d.Limits.MaxPoints
	}
	if c.Limits.MaxResamples <= 0 {
		c.Limits.MaxResamples = d.Limits.MaxResamples
	}
	if c.Limits.MaxAt <= 0 {
		c.Limits.MaxAt = d.Limits.MaxAt
	}
	if c.RequestTimeout <= 0 {
		c.RequestTimeout = d.RequestTimeout
	}
	if c.Slots <= 0 {
		c.Slots = runtime.GOMAXPROCS(0)
	}
	if c.SlotWait <= 0 {
		c.SlotWait = d.SlotWait
	}
	if c.MaxBatch <= 0 {
		c.MaxBatch = d.MaxBatch
	}
	c.Limits.MaxBatch = c.MaxBatch
	if c.MaxInFlightBytes <= 0 {
		c.MaxInFlightBytes = 4 * c.MaxBodyBytes
	}
	for _, p := range []struct{ v, d *time.Duration }{{&c.ReadHeaderTimeout, &d.ReadHeaderTimeout},
		{&c.ReadTimeout, &d.ReadTimeout}, {&c.WriteTimeout, &d.WriteTimeout}, {&c.IdleTimeout, &d.IdleTimeout},
		{&c.BodyIdleTimeout, &d.BodyIdleTimeout},
		{&c.ShutdownTimeout, &d.ShutdownTimeout}} {
		if *p.v <= 0 {
			*p.v = *p.d
		}
	}
	if c.Logger == nil {
		c.Logger = slog.New(slog.NewJSONHandler(io.Discard, nil))
	}
	if c.Version == "" {
		c.Version = "dev"
	}
	return c
}

// Server is the HTTP service. Create it with NewServer.
type Server struct {
	cfg      Config
	engine   *gin.Engine
	metrics  *metrics
	slots    chan struct{}
	draining atomic.Bool
	keys     *keyring
	intake   *budget
}

// NewServer builds the router and its dependencies.
func NewServer(cfg Config) (*Server, error) {
	cfg = cfg.withDefaults()
	keys, err := newKeyring(cfg.APIKeys)
	if err != nil {
		return nil, err
	}
	s := &Server{cfg: cfg, metrics: newMetrics(cfg.Slots), slots: make(chan struct{}, cfg.Slots), keys: keys,
		intake: newBudget(cfg.MaxInFlightBytes)}
	gin.SetMode(gin.ReleaseMode)
	e := gin.New()
	e.HandleMethodNotAllowed = true
	e.ContextWithFallback = true
	e.Use(s.observe, gin.CustomRecovery(s.recovered))
	e.NoRoute(func(c *gin.Context) { s.problem(c, newProblem(kindNotFound, "no such resource: see /openapi.yaml")) })
	e.NoMethod(func(c *gin.Context) {
		s.problem(c, newProblem(kindMethod, fmt.Sprintf("%s is not allowed here", c.Request.Method)))
	})
	v1 := e.Group("/v1", s.authorize)
	v1.POST("/fit", s.handleFit)
	v1.POST("/batch", s.handleBatch)
	v1.POST("/method-comparison", s.handleCompare)
	v1.POST("/plots/:kind", s.handlePlot)
	e.GET("/", s.handleIndex)
	e.POST("/report", s.authorizeForm, s.handleFormReport)
	e.GET("/healthz", s.handleHealthz)
	e.GET("/readyz", s.handleReadyz)
	e.GET("/openapi.yaml", handleOpenAPI)
	e.GET("/demo/:file", s.handleDemo)
	if cfg.MetricsAddr == "" {
		e.GET("/metrics", gin.WrapH(s.MetricsHandler()))
	}
	s.engine = e
	return s, nil
}

// Handler is the service's http.Handler.
func (s *Server) Handler() http.Handler { return s.engine }

// MetricsHandler serves the Prometheus metrics.
func (s *Server) MetricsHandler() http.Handler {
	return promhttp.HandlerFor(s.metrics.reg, promhttp.HandlerOpts{Registry: s.metrics.reg})
}

// Routes lists the registered method and path templates (for the OpenAPI
// coverage test).
func (s *Server) Routes() []string {
	var out []string
	for _, r := range s.engine.Routes() {
		out = append(out, r.Method+" "+r.Path)
	}
	return out
}

// Serve accepts connections on ln until ctx is done, then drains: /readyz
// turns 503, new connections are refused, and in-flight requests finish
// within ShutdownTimeout.
func (s *Server) Serve(ctx context.Context, ln net.Listener, metricsLn net.Listener) error {
	srv := s.httpServer(s.engine)
	errc := make(chan error, 2)
	go func() { errc <- srv.Serve(ln) }()
	var msrv *http.Server
	if metricsLn != nil {
		mux := http.NewServeMux()
		mux.Handle("/metrics", s.MetricsHandler())
		msrv = s.httpServer(mux)
		go func() { errc <- msrv.Serve(metricsLn) }()
	}
	select {
	case err := <-errc:
		return err
	case <-ctx.Done():
	}
	s.draining.Store(true)
	s.cfg.Logger.Info("draining", "timeout", s.cfg.ShutdownTimeout.String())
	sctx, cancel := context.WithTimeout(context.Background(), s.cfg.ShutdownTimeout)
	defer cancel()
	err := srv.Shutdown(sctx)
	if msrv != nil {
		_ = msrv.Shutdown(sctx)
	}
	if errors.Is(err, context.DeadlineExceeded) {
		return fmt.Errorf("shutdown: in-flight requests did not finish within %v", s.cfg.ShutdownTimeout)
	}
	return err
}

func (s *Server) httpServer(h http.Handler) *http.Server {
	return &http.Server{
		Handler:           h,
		ReadHeaderTimeout: s.cfg.ReadHeaderTimeout,
		ReadTimeout:       s.cfg.ReadTimeout,
		WriteTimeout:      s.cfg.WriteTimeout,
		IdleTimeout:       s.cfg.IdleTimeout,
		MaxHeaderBytes:    64 << 10,
		ErrorLog:          slog.NewLogLogger(s.cfg.Logger.Handler(), slog.LevelWarn),
	}
}

// observe is the outer middleware: security headers, a request id, the
// request log line (route, status, duration: never the data) and metrics
// labelled by route template.
func (s *Server) observe(c *gin.Context) {
	start := time.Now()
	id := newRequestID()
	c.Header("X-Request-Id", id)
	c.Header("X-Content-Type-Options", "nosniff")
	s.metrics.inFlight.Inc()
	c.Next()
	s.metrics.inFlight.Dec()
	route := c.FullPath()
	if route == "" {
		route = "unmatched"
	}
	status := c.Writer.Status()
	d := time.Since(start)
	s.metrics.requests.WithLabelValues(route, c.Request.Method, strconv.Itoa(status)).Inc()
	s.metrics.duration.WithLabelValues(route).Observe(d.Seconds())
	level := slog.LevelInfo
	if status >= 500 {
		level = slog.LevelWarn
	}
	s.cfg.Logger.LogAttrs(c.Request.Context(), level, "request",
		slog.String("request_id", id), slog.String("method", c.Request.Method), slog.String("route", route),
		slog.Int("status", status), slog.Float64("duration_ms", float64(d.Microseconds())/1000))
}

// Request ids: a random prefix drawn at start, then a counter (unique in
// the process, cheap: no system call per request).
var (
	requestPrefix = func() string {
		var b [4]byte
		_, _ = rand.Read(b[:])
		return hex.EncodeToString(b[:])
	}()
	requestCount atomic.Uint64
)

func newRequestID() string {
	return requestPrefix + "-" + strconv.FormatUint(requestCount.Add(1), 16)
}

func (s *Server) recovered(c *gin.Context, v any) {
	s.cfg.Logger.Error("panic", "route", c.FullPath(), "panic", fmt.Sprint(v))
	s.problem(c, newProblem(kindInternal, "the server met an internal error; it has been logged"))
}

// problem writes an RFC 9457 answer and counts it.
func (s *Server) problem(c *gin.Context, p *Problem) {
	s.metrics.problems.WithLabelValues(strings.TrimPrefix(p.Type, ProblemTypeBase)).Inc()
	if p.RetryAfter > 0 {
		c.Header("Retry-After", strconv.Itoa(p.RetryAfter))
	}
	if p.Status == http.StatusUnauthorized {
		c.Header("WWW-Authenticate", `Bearer realm="eivfit"`)
	}
	c.Header("Content-Type", "application/problem+json")
	c.Status(p.Status)
	_ = WriteJSON(c.Writer, p)
	c.Abort()
}

// toProblem maps any error of the compute path to a problem; unknown
// errors are internal and their text is not shown.
func (s *Server) toProblem(c *gin.Context, err error) *Problem {
	var p *Problem
	var mbe *http.MaxBytesError
	switch {
	case errors.As(err, &p):
		return p
	case errors.As(err, &mbe):
		return newProblem(kindTooLarge, fmt.Sprintf("the body exceeds this server's limit of %d bytes", s.cfg.MaxBodyBytes))
	case errors.Is(err, context.DeadlineExceeded):
		p := newProblem(kindDeadline, fmt.Sprintf("the computation did not finish within %v; ask for fewer resamples or points", s.cfg.RequestTimeout))
		p.RetryAfter = 1
		return p
	case errors.Is(err, context.Canceled):
		return newProblem(kindDeadline, "the request was cancelled")
	}
	s.cfg.Logger.Error("internal error", "route", c.FullPath(), "error", err.Error())
	return newProblem(kindInternal, "the server met an internal error; it has been logged")
}

// acquire takes a compute slot, waiting up to SlotWait.
func (s *Server) acquire(ctx context.Context) (release func(), p *Problem) {
	start := time.Now()
	t := time.NewTimer(s.cfg.SlotWait)
	defer t.Stop()
	select {
	case s.slots <- struct{}{}:
	case <-t.C:
		s.metrics.slotRejected.Inc()
		p := newProblem(kindBusy, fmt.Sprintf("every compute slot (%d) stayed busy for %v; retry later", cap(s.slots), s.cfg.SlotWait))
		p.RetryAfter = 1
		return nil, p
	case <-ctx.Done():
		return nil, newProblem(kindDeadline, "the request was cancelled while waiting for a compute slot")
	}
	s.metrics.slotWait.Observe(time.Since(start).Seconds())
	s.metrics.slotsInUse.Inc()
	return func() { <-s.slots; s.metrics.slotsInUse.Dec() }, nil
}

// bodyChunk is the step in which a body is charged to the intake budget
// as it arrives: a request holds at most one chunk more than it has
// received, so that idle or slow uploads hold next to nothing.
const bodyChunk = 256 << 10

// body reads the whole request body into memory within the size limit,
// the intake budget and the body timeouts, and returns it; the caller must
// call release when done with the request. A declared length above the
// limit is refused before anything is read. The budget is charged in
// bodyChunk steps as bytes arrive, never for a declared length up front.
// A body that stalls for BodyIdleTimeout, or is not complete within
// ReadTimeout, is answered 408; a body that cannot get budget within
// SlotWait is answered 503 naming the memory budget.
func (s *Server) body(c *gin.Context) (io.Reader, func(), *Problem) {
	n := c.Request.ContentLength
	if n > s.cfg.MaxBodyBytes {
		return nil, nil, newProblem(kindTooLarge, fmt.Sprintf("the body (%d bytes) exceeds this server's limit of %d bytes",
			n, s.cfg.MaxBodyBytes))
	}
	var held int64
	release := func() {
		s.intake.release(held)
		s.metrics.intakeBytes.Sub(float64(held))
		held = 0
	}
	charge := func(upTo int64) bool {
		if upTo <= held {
			return true
		}
		ctx, cancel := context.WithTimeout(c.Request.Context(), s.cfg.SlotWait)
		defer cancel()
		if !s.intake.acquire(ctx, upTo-held) {
			return false
		}
		s.metrics.intakeBytes.Add(float64(upTo - held))
		held = upTo
		return true
	}
	rc := http.NewResponseController(c.Writer)
	start := time.Now()
	whole := start.Add(s.cfg.ReadTimeout)
	limit := s.cfg.MaxBodyBytes
	var buf []byte
	if n >= 0 {
		buf = make([]byte, 0, n) // pages become resident only as bytes arrive
	}
	r := c.Request.Body
	for {
		if len(buf) == cap(buf) {
			if int64(len(buf)) > limit {
				release()
				return nil, nil, newProblem(kindTooLarge, fmt.Sprintf("the body exceeds this server's limit of %d bytes", limit))
			}
			// A declared length is read to its end (then EOF); an
			// undeclared one grows, within the limit plus one byte to
			// detect an overrun.
			grow := max(int64(cap(buf)), bodyChunk)
			buf = slices.Grow(buf, int(min(grow, limit+1-int64(len(buf)))))
		}
		// Charge the next chunk before its pages are touched.
		if !charge(min(int64(len(buf))+bodyChunk, int64(cap(buf)))) {
			release()
			p := newProblem(kindBodyBudget, fmt.Sprintf("the server is holding as many request-body bytes as its memory budget (%d bytes) allows, and none were freed within %v; retry later",
				s.cfg.MaxInFlightBytes, s.cfg.SlotWait))
			p.RetryAfter = 1
			return nil, nil, p
		}
		_ = rc.SetReadDeadline(earliest(whole, time.Now().Add(s.cfg.BodyIdleTimeout)))
		end := min(int64(len(buf))+bodyChunk, int64(cap(buf)))
		k, err := r.Read(buf[len(buf):end])
		buf = buf[:len(buf)+k]
		if err == io.EOF {
			break
		}
		if err != nil {
			release()
			// The deadline stays in the past: the server then drops the
			// rest of the body with the connection instead of reading it.
			_ = rc.SetReadDeadline(time.Now())
			return nil, nil, s.bodyReadProblem(c, err, time.Since(start))
		}
	}
	_ = rc.SetReadDeadline(time.Time{})
	if int64(len(buf)) > limit {
		release()
		return nil, nil, newProblem(kindTooLarge, fmt.Sprintf("the body exceeds this server's limit of %d bytes", limit))
	}
	return &Body{b: buf, lim: &s.cfg.Limits}, release, nil
}

func earliest(a, b time.Time) time.Time {
	if a.Before(b) {
		return a
	}
	return b
}

// bodyReadProblem maps a failed body read: a timeout is 408 (and the
// connection is closed), anything else 400.
func (s *Server) bodyReadProblem(c *gin.Context, err error, took time.Duration) *Problem {
	var ne net.Error
	if errors.Is(err, os.ErrDeadlineExceeded) || (errors.As(err, &ne) && ne.Timeout()) {
		c.Header("Connection", "close")
		return newProblem(kindBodyTimeout, fmt.Sprintf("the body did not arrive in time (no byte for %v, or not complete within %v; %v elapsed)",
			s.cfg.BodyIdleTimeout, s.cfg.ReadTimeout, took.Round(time.Millisecond)))
	}
	return invalid("", "the body could not be read: the connection failed or the body ended early")
}

// Body is a request body held in memory. Decoders take its bytes without
// copying them (readBody).
type Body struct {
	b   []byte
	off int
	lim *Limits // the limits its decoders count lists against
}

// NewBody wraps b.
func NewBody(b []byte) *Body { return &Body{b: b} }

func (b *Body) Read(p []byte) (int, error) {
	if b.off >= len(b.b) {
		return 0, io.EOF
	}
	k := copy(p, b.b[b.off:])
	b.off += k
	return k, nil
}

// Len is the number of unread bytes.
func (b *Body) Len() int { return len(b.b) - b.off }

// take returns the unread bytes and marks them read.
func (b *Body) take() []byte {
	r := b.b[b.off:]
	b.off = len(b.b)
	return r
}

// mediaType returns the request's media type: "json", "csv", or "" after
// writing a 415.
func (s *Server) mediaType(c *gin.Context, allowCSV bool) string {
	ct := c.GetHeader("Content-Type")
	mt, _, err := mime.ParseMediaType(ct)
	if ct == "" {
		err = errors.New("missing")
	}
	switch {
	case err == nil && (mt == "application/json" || strings.HasSuffix(mt, "+json")):
		return "json"
	case err == nil && allowCSV && (mt == "text/csv" || mt == "application/csv"):
		return "csv"
	}
	want := "application/json"
	if allowCSV {
		want += " or text/csv"
	}
	s.problem(c, newProblem(kindMediaType, fmt.Sprintf("Content-Type %q is not accepted here; send %s", ct, want)))
	return ""
}

func (s *Server) settings(workers int) Settings {
	return Settings{Limits: s.cfg.Limits, Workers: workers, Observe: func(method string, d time.Duration, resamples int) {
		s.metrics.fitDuration.WithLabelValues(method).Observe(d.Seconds())
		s.metrics.resamples.Add(float64(resamples))
	}}
}

// handleFit serves POST /v1/fit: decode (JSON or CSV), validate, compute
// in a compute slot under the request deadline, encode (JSON, or the HTML
// report for Accept: text/html).
func (s *Server) handleFit(c *gin.Context) {
	serveAnalysis(s, c, fitFromCSV, DecodeFitJSON, s.computeFit,
		func(resp *FitResponse, req *FitRequest, sha string) (*report.Page, error) {
			return FitReport(resp, &req.Points, sha, s.cfg.Version)
		})
}

// serveAnalysis is the flow of the analysis endpoints: the media type, the
// body within its limits and the memory budget, decode and validate,
// compute, then JSON or the HTML report.
func serveAnalysis[T validator, R any](s *Server, c *gin.Context,
	fromCSV func(io.Reader, url.Values) (T, error), fromJSON func(io.Reader) (T, error),
	compute func(*gin.Context, T) (R, error), page func(R, T, string) (*report.Page, error)) {
	kind := s.mediaType(c, true)
	if kind == "" {
		return
	}
	body, release, p := s.body(c)
	if p != nil {
		s.problem(c, p)
		return
	}
	defer release()
	raw := body.(*Body).b
	req, err := decodeRequest(s, c, kind, body, fromCSV, fromJSON)
	if err != nil {
		s.problem(c, s.toProblem(c, err))
		return
	}
	resp, err := compute(c, req)
	if err != nil {
		s.problem(c, s.toProblem(c, err))
		return
	}
	if wantsHTML(c) {
		sum := sha256.Sum256(raw)
		pg, err := page(resp, req, hex.EncodeToString(sum[:]))
		if err != nil {
			s.problem(c, s.toProblem(c, err))
			return
		}
		s.writeHTML(c, http.StatusOK, pg.Write)
		return
	}
	s.writeJSON(c, http.StatusOK, resp)
}

// validator is a decoded request that checks itself against the limits.
type validator interface{ Validate(Limits) error }

// decodeRequest decodes a JSON body, or a CSV body with the options in the
// query string, and validates it: the decode and validate steps of every
// handler that takes both media types.
func decodeRequest[T validator](s *Server, c *gin.Context, kind string, body io.Reader,
	fromCSV func(io.Reader, url.Values) (T, error), fromJSON func(io.Reader) (T, error)) (T, error) {
	var req T
	var err error
	if kind == "csv" {
		req, err = fromCSV(body, c.Request.URL.Query())
	} else {
		if len(c.Request.URL.RawQuery) > 0 {
			return req, invalid("query", "a JSON request carries its options in the body, not the query string")
		}
		req, err = fromJSON(body)
	}
	if err == nil {
		err = req.Validate(s.cfg.Limits)
	}
	return req, err
}

func fitFromCSV(r io.Reader, q url.Values) (*FitRequest, error) {
	d, err := DecodeCSV(r)
	if err != nil {
		return nil, err
	}
	return FitRequestFromQuery(q, d)
}

func compareFromCSV(r io.Reader, q url.Values) (*CompareRequest, error) {
	req, err := DecodeCompareCSV(r)
	if err != nil {
		return nil, err
	}
	return req, CompareRequestFromQuery(q, req)
}

func (s *Server) writeJSON(c *gin.Context, status int, v any) {
	c.Header("Content-Type", "application/json")
	c.Status(status)
	if err := WriteJSON(c.Writer, v); err != nil {
		s.cfg.Logger.Warn("write failed", "route", c.FullPath(), "error", err.Error())
	}
}

func (s *Server) handleHealthz(c *gin.Context) {
	s.writeJSON(c, http.StatusOK, map[string]string{"status": "ok", "version": s.cfg.Version})
}

// handleReadyz answers 503 while draining, and while the intake budget
// could not take one more maximum-size body (the pod is then saturated
// with uploads and a load balancer should prefer another); it reports the
// compute slots and the body budget in use.
func (s *Server) handleReadyz(c *gin.Context) {
	status, code := "ready", http.StatusOK
	free := s.intake.available()
	switch {
	case s.draining.Load():
		status, code = "draining", http.StatusServiceUnavailable
	case free < min(s.cfg.MaxBodyBytes, s.cfg.MaxInFlightBytes):
		status, code = "body budget full", http.StatusServiceUnavailable
	}
	s.writeJSON(c, code, map[string]any{"status": status, "slots": cap(s.slots), "slots_in_use": len(s.slots),
		"body_budget_bytes": s.cfg.MaxInFlightBytes, "body_bytes_in_use": s.cfg.MaxInFlightBytes - free})
}

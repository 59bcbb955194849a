package api

import (
	"context"
	"crypto/rand"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net"
	"net/http"
	"runtime"
	"strconv"
	"strings"
	"sync/atomic"
	"time"

	"eivfit/api/wire"
	"eivfit/eiv/study"

	"github.com/gin-gonic/gin"
	"github.com/prometheus/client_golang/prometheus/promhttp"
)

// Config is the service's configuration. The zero value of a field means
// its documented default (DefaultConfig).
type Config struct {
	Addr string // listen address; default 127.0.0.1:8080
	// MetricsAddr, when set, serves /metrics on a separate listener,
	// without a key, instead of the main one (where it needs a key when
	// APIKeys are set).
	MetricsAddr string
	// MaxBodyBytes bounds a request body; default 64 MiB.
	MaxBodyBytes int64
	Limits       study.Limits
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
	// on /v1/* and on /metrics of the main listener; each entry is a key or
	// its SHA-256 in hex.
	APIKeys []string
	// Logger receives one line per request (never request data); default
	// JSON on stderr.
	Logger *slog.Logger
	// Version is reported in reports and /healthz, and stored with every
	// study with VCSRevision (the commit it was built from).
	Version, VCSRevision string
	// OpenStore, when set, opens the study store: computations can then be
	// saved (save=true) and the /v1/studies routes answer.
	OpenStore OpenStore
	// MaxStoredBytes bounds the body of a saved study; default 16 MiB.
	MaxStoredBytes int64
}

// DefaultConfig holds the defaults, documented in `eivfit serve --help`
// and the OpenAPI document.
var DefaultConfig = Config{
	Addr:              "127.0.0.1:8080",
	MaxBodyBytes:      64 << 20,
	Limits:            study.DefaultLimits,
	RequestTimeout:    60 * time.Second,
	SlotWait:          2 * time.Second,
	MaxBatch:          1000,
	ReadHeaderTimeout: 5 * time.Second,
	ReadTimeout:       60 * time.Second,
	WriteTimeout:      120 * time.Second,
	IdleTimeout:       120 * time.Second,
	BodyIdleTimeout:   10 * time.Second,
	ShutdownTimeout:   90 * time.Second,
	MaxStoredBytes:    16 << 20,
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
	if c.MaxStoredBytes <= 0 {
		c.MaxStoredBytes = d.MaxStoredBytes
	}
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
	// limits are what the decoders count a body's lists against.
	limits wire.Limits
	store  *storeHandle // nil without OpenStore
}

// NewServer builds the router and its dependencies.
func NewServer(cfg Config) (*Server, error) {
	cfg = cfg.withDefaults()
	keys, err := newKeyring(cfg.APIKeys)
	if err != nil {
		return nil, err
	}
	s := &Server{cfg: cfg, metrics: newMetrics(cfg.Slots), slots: make(chan struct{}, cfg.Slots), keys: keys,
		intake: newBudget(cfg.MaxInFlightBytes), limits: wire.Limits{Limits: cfg.Limits, MaxBatch: cfg.MaxBatch}}
	if cfg.OpenStore != nil {
		s.store = s.openStore(cfg.OpenStore)
	}
	gin.SetMode(gin.ReleaseMode)
	e := gin.New()
	e.HandleMethodNotAllowed = true
	e.ContextWithFallback = true
	e.Use(s.observe, gin.CustomRecovery(s.recovered))
	e.NoRoute(func(c *gin.Context) {
		s.problem(c, wire.NewProblem(wire.KindNotFound, "no such resource: see /openapi.yaml"))
	})
	e.NoMethod(func(c *gin.Context) {
		s.problem(c, wire.NewProblem(wire.KindMethod, fmt.Sprintf("%s is not allowed here", c.Request.Method)))
	})
	const jsonType, htmlType = "application/json", "text/html"
	v1 := e.Group("/v1", s.authorize, s.plainBody(s.problem))
	v1.POST("/fit", s.negotiated(jsonType, htmlType), s.handleFit)
	v1.POST("/batch", s.negotiated(jsonType), s.handleBatch)
	v1.POST("/method-comparison", s.negotiated(jsonType, htmlType), s.handleCompare)
	v1.POST("/calibration", s.negotiated(jsonType, htmlType), s.handleCalibration)
	v1.POST("/plan", s.negotiated(jsonType), s.handlePlan)
	v1.POST("/plots/:kind", s.negotiated("image/svg+xml"), s.handlePlot)
	get(v1, "/studies", s.negotiated(jsonType), s.handleStudies)
	get(v1, "/studies/:id", s.negotiated(jsonType, htmlType), s.handleStudy)
	get(v1, "/studies/:id/input", s.handleStudyInput)
	get(v1, "/studies/:id/history", s.negotiated(jsonType), s.handleHistory)
	v1.POST("/studies/:id/revisions", s.negotiated(jsonType), s.handleRevise)
	v1.POST("/studies/:id/revisions/:n/signatures", s.needSigner, s.negotiated(jsonType), s.handleSign)
	e.POST("/report", s.authorizeForm, s.negotiated(htmlType), s.plainBody(s.formProblemOf), s.handleFormReport)
	get(e, "/", s.negotiated(htmlType), s.handleIndex)
	get(e, "/healthz", s.negotiated(jsonType), s.handleHealthz)
	get(e, "/readyz", s.negotiated(jsonType), s.handleReadyz)
	get(e, "/openapi.yaml", s.negotiated("application/yaml"), handleOpenAPI)
	get(e, "/demo/:file", s.negotiated("text/csv"), s.handleDemo)
	if cfg.MetricsAddr == "" {
		// On the main listener, /metrics needs a key whenever /v1 does;
		// a separate metrics listener (MetricsAddr) serves it open.
		get(e, "/metrics", s.authorize, gin.WrapH(s.MetricsHandler()))
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
	s.metrics.requestsOf.get(requestLabels{route, c.Request.Method, status}).Inc()
	s.metrics.durationOf.get(route).Observe(d.Seconds())
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
	s.problem(c, wire.NewProblem(wire.KindInternal, "the server met an internal error; it has been logged"))
}

// problem writes an RFC 9457 answer and counts it.
func (s *Server) problem(c *gin.Context, p *wire.Problem) {
	s.metrics.problemsOf.get(strings.TrimPrefix(p.Type, wire.ProblemTypeBase)).Inc()
	if p.RetryAfter > 0 {
		c.Header("Retry-After", strconv.Itoa(p.RetryAfter))
	}
	if p.Status == http.StatusUnauthorized {
		c.Header("WWW-Authenticate", `Bearer realm="eivfit"`)
	}
	c.Header("Content-Type", "application/problem+json")
	c.Status(p.Status)
	_ = wire.WriteJSON(c.Writer, p)
	c.Abort()
}

// acquire takes a compute slot, waiting up to SlotWait.
func (s *Server) acquire(ctx context.Context) (release func(), p *wire.Problem) {
	start := time.Now()
	select {
	case s.slots <- struct{}{}: // a free slot: no timer to arm
	default:
		if p := s.awaitSlot(ctx); p != nil {
			return nil, p
		}
	}
	s.metrics.slotWait.Observe(time.Since(start).Seconds())
	s.metrics.slotsInUse.Inc()
	return func() { <-s.slots; s.metrics.slotsInUse.Dec() }, nil
}

// awaitSlot waits up to SlotWait for a compute slot and takes it.
func (s *Server) awaitSlot(ctx context.Context) *wire.Problem {
	t := time.NewTimer(s.cfg.SlotWait)
	defer t.Stop()
	select {
	case s.slots <- struct{}{}:
		return nil
	case <-t.C:
		s.metrics.slotRejected.Inc()
		p := wire.NewProblem(wire.KindBusy, fmt.Sprintf("every compute slot (%d) stayed busy for %v; retry later", cap(s.slots), s.cfg.SlotWait))
		p.RetryAfter = 1
		return p
	case <-ctx.Done():
		return wire.NewProblem(wire.KindDeadline, "the request was cancelled while waiting for a compute slot")
	}
}

func (s *Server) settings(workers int) study.Settings {
	return study.Settings{Limits: s.cfg.Limits, Workers: workers, Observe: func(method string, d time.Duration, resamples int) {
		s.metrics.fitOf.get(method).Observe(d.Seconds())
		s.metrics.resamples.Add(float64(resamples))
	}}
}

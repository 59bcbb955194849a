package api

import (
	"maps"
	"strconv"
	"sync"
	"sync/atomic"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/collectors"
)

// metrics are the service's Prometheus metrics, on a registry of their own.
type metrics struct {
	reg          *prometheus.Registry
	requests     *prometheus.CounterVec
	duration     *prometheus.HistogramVec
	problems     *prometheus.CounterVec
	fitDuration  *prometheus.HistogramVec
	points       prometheus.Counter
	resamples    prometheus.Counter
	slotsInUse   prometheus.Gauge
	slotsTotal   prometheus.Gauge
	slotRejected prometheus.Counter
	slotWait     prometheus.Histogram
	inFlight     prometheus.Gauge
	intakeBytes  prometheus.Gauge
	// The study store: operation latency and errors.
	storeDuration *prometheus.HistogramVec
	storeErrors   *prometheus.CounterVec

	// The children of the vectors a request touches, by label values, so
	// that a request does not hash its labels into the vector each time.
	requestsOf labelCache[requestLabels, prometheus.Counter]
	durationOf labelCache[string, prometheus.Observer]
	fitOf      labelCache[string, prometheus.Observer]
	problemsOf labelCache[string, prometheus.Counter]
}

// requestLabels are the labels of eivfit_http_requests_total.
type requestLabels struct {
	route, method string
	code          int
}

// labelCache maps label values to a vector's child: reads are lock-free
// on a map that is copied when a new child is added. It holds at most
// maxCachedLabels children; values beyond (a client's invented methods,
// say) go to the vector directly, as before.
type labelCache[K comparable, M any] struct {
	m     atomic.Pointer[map[K]M]
	mu    sync.Mutex
	child func(K) M
}

const maxCachedLabels = 512

func (c *labelCache[K, M]) get(k K) M {
	if m := c.m.Load(); m != nil {
		if v, ok := (*m)[k]; ok {
			return v
		}
	}
	v := c.child(k)
	c.mu.Lock()
	defer c.mu.Unlock()
	old := c.m.Load()
	if old != nil && len(*old) >= maxCachedLabels {
		return v
	}
	n := map[K]M{k: v}
	if old != nil {
		maps.Copy(n, *old)
	}
	c.m.Store(&n)
	return v
}

func newMetrics(slots int) *metrics {
	m := &metrics{
		reg: prometheus.NewRegistry(),
		requests: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "eivfit_http_requests_total",
			Help: "HTTP requests by route template, method and status code.",
		}, []string{"route", "method", "code"}),
		duration: prometheus.NewHistogramVec(prometheus.HistogramOpts{
			Name:    "eivfit_http_request_duration_seconds",
			Help:    "HTTP request latency by route template.",
			Buckets: []float64{0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10, 30, 60},
		}, []string{"route"}),
		problems: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "eivfit_problems_total",
			Help: "Error answers by problem type (the last part of the problem type URI).",
		}, []string{"type"}),
		fitDuration: prometheus.NewHistogramVec(prometheus.HistogramOpts{
			Name:    "eivfit_fit_duration_seconds",
			Help:    "Time to compute one fit, by method, bootstrap included.",
			Buckets: prometheus.ExponentialBuckets(0.00001, 4, 12),
		}, []string{"method"}),
		points: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "eivfit_points_processed_total",
			Help: "Data points fitted (each dataset counted once).",
		}),
		resamples: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "eivfit_resamples_processed_total",
			Help: "Bootstrap resamples computed, over all methods.",
		}),
		slotsInUse: prometheus.NewGauge(prometheus.GaugeOpts{
			Name: "eivfit_compute_slots_in_use",
			Help: "Compute slots held by requests now.",
		}),
		slotsTotal: prometheus.NewGauge(prometheus.GaugeOpts{
			Name: "eivfit_compute_slots",
			Help: "Compute slots configured.",
		}),
		slotRejected: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "eivfit_compute_slot_rejections_total",
			Help: "Requests answered 503 because every compute slot stayed busy.",
		}),
		slotWait: prometheus.NewHistogram(prometheus.HistogramOpts{
			Name:    "eivfit_compute_slot_wait_seconds",
			Help:    "Time requests waited for a compute slot.",
			Buckets: []float64{0.0001, 0.001, 0.01, 0.05, 0.1, 0.25, 0.5, 1, 2, 5},
		}),
		inFlight: prometheus.NewGauge(prometheus.GaugeOpts{
			Name: "eivfit_http_requests_in_flight",
			Help: "HTTP requests being served now.",
		}),
		intakeBytes: prometheus.NewGauge(prometheus.GaugeOpts{
			Name: "eivfit_intake_bytes_in_use",
			Help: "Request-body bytes reserved in the memory budget now.",
		}),
		storeDuration: prometheus.NewHistogramVec(prometheus.HistogramOpts{
			Name:    "eivfit_store_operation_duration_seconds",
			Help:    "Study store operation latency by operation (save, get, list, add_revision, history, sign, ping).",
			Buckets: []float64{0.0001, 0.00025, 0.0005, 0.001, 0.002, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 1, 5},
		}, []string{"op"}),
		storeErrors: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "eivfit_store_errors_total",
			Help: "Study store operations that failed, by operation and class (not_found, conflict, unavailable, invalid, other).",
		}, []string{"op", "class"}),
	}
	m.slotsTotal.Set(float64(slots))
	m.requestsOf.child = func(l requestLabels) prometheus.Counter {
		return m.requests.WithLabelValues(l.route, l.method, strconv.Itoa(l.code))
	}
	m.durationOf.child = func(route string) prometheus.Observer { return m.duration.WithLabelValues(route) }
	m.fitOf.child = func(method string) prometheus.Observer { return m.fitDuration.WithLabelValues(method) }
	m.problemsOf.child = func(typ string) prometheus.Counter { return m.problems.WithLabelValues(typ) }
	m.reg.MustRegister(m.requests, m.duration, m.problems, m.fitDuration, m.points, m.resamples,
		m.slotsInUse, m.slotsTotal, m.slotRejected, m.slotWait, m.inFlight, m.intakeBytes, m.storeDuration, m.storeErrors,
		collectors.NewGoCollector(), collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}))
	return m
}

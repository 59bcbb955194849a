package api

import (
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
	m.reg.MustRegister(m.requests, m.duration, m.problems, m.fitDuration, m.points, m.resamples,
		m.slotsInUse, m.slotsTotal, m.slotRejected, m.slotWait, m.inFlight, m.intakeBytes, m.storeDuration, m.storeErrors,
		collectors.NewGoCollector(), collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}))
	return m
}

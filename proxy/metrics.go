package proxy

import (
	"fmt"

	"github.com/prometheus/client_golang/prometheus"
)

// latencyBuckets suit a sidecar whose backends answer in milliseconds and
// time out in hundreds of them (common practice: a few buckets per decade).
func latencyBuckets() []float64 {
	return []float64{0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5}
}

// metrics are the data plane's collectors; their label values are few:
// routes are configured, backends are two, outcomes, reasons and kinds
// are fixed lists.
type metrics struct {
	requests   *prometheus.CounterVec
	duration   *prometheus.HistogramVec
	backendDur *prometheus.HistogramVec
	backendErr *prometheus.CounterVec
	dropped    *prometheus.CounterVec
	loops      prometheus.Counter
	ramp       *rampCollector
}

// backendMetrics are one backend's series, resolved once.
type backendMetrics struct {
	duration prometheus.Observer
	errors   [numKinds]prometheus.Counter
	dropped  prometheus.Counter
}

// routeMetrics are one route's series, resolved when a runtime is built
// so that the hot path does no label lookups.
type routeMetrics struct {
	requests [numOutcomes][numReasons]prometheus.Counter
	duration prometheus.Observer
}

func newMetrics(s *Server) *metrics {
	return &metrics{
		requests: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "riffle_proxy_requests_total",
			Help: "Requests on configured routes by how they ended: interleaved, incumbent-only, challenger-only or failed, and why.",
		}, []string{"route", "outcome", "reason"}),
		duration: prometheus.NewHistogramVec(prometheus.HistogramOpts{
			Name:    "riffle_proxy_request_duration_seconds",
			Help:    "Client-facing latency of requests on configured routes.",
			Buckets: latencyBuckets(),
		}, []string{"route"}),
		backendDur: prometheus.NewHistogramVec(prometheus.HistogramOpts{
			Name:    "riffle_backend_request_duration_seconds",
			Help:    "Latency of calls to each backend on configured routes, body included.",
			Buckets: latencyBuckets(),
		}, []string{"backend"}),
		backendErr: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "riffle_backend_errors_total",
			Help: "Failed backend calls on configured routes by kind: timeout, connect, status or body.",
		}, []string{"backend", "kind"}),
		dropped: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "riffle_proxy_dropped_elements_total",
			Help: "List elements dropped because they had no identity at the route's id pointer.",
		}, []string{"backend"}),
		loops: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "riffle_proxy_loops_total",
			Help: "Requests answered 508 because they already carried this riffle's Via mark: a backend URL leads back to riffle.",
		}),
		ramp: &rampCollector{s: s, desc: prometheus.NewDesc("riffle_experiment_ramp_ratio",
			"Effective ramp: the share of users who get interleaved lists.", []string{"experiment"}, nil)},
	}
}

// register registers every collector on reg; nil registers nothing.
func (m *metrics) register(reg prometheus.Registerer) error {
	if reg == nil {
		return nil
	}
	for _, c := range []prometheus.Collector{m.requests, m.duration, m.backendDur, m.backendErr, m.dropped, m.loops, m.ramp} {
		if err := reg.Register(c); err != nil {
			return fmt.Errorf("proxy: register metrics: %w", err)
		}
	}
	return nil
}

func (m *metrics) backend(name string) backendMetrics {
	b := backendMetrics{
		duration: m.backendDur.WithLabelValues(name),
		dropped:  m.dropped.WithLabelValues(name),
	}
	for k := kindTimeout; k <= kindBody; k++ {
		b.errors[k] = m.backendErr.WithLabelValues(name, k.String())
	}
	return b
}

func (m *metrics) route(path string) *routeMetrics {
	rm := &routeMetrics{duration: m.duration.WithLabelValues(path)}
	for _, p := range outcomePairs() {
		o, r := outcome(p[0]), reason(p[1])
		rm.requests[o][r] = m.requests.WithLabelValues(path, o.String(), r.label())
	}
	return rm
}

// forgetRoute deletes the series of a route that a new runtime no longer has.
func (m *metrics) forgetRoute(path string) {
	m.requests.DeletePartialMatch(prometheus.Labels{"route": path})
	m.duration.DeleteLabelValues(path)
}

// count adds one request that ended in o for r.
func (rm *routeMetrics) count(o outcome, r reason) {
	if c := rm.requests[o][r]; c != nil {
		c.Inc()
	}
}

// rampCollector reports the effective ramp when scraped, so the gauge is
// current even when no request has come in.
type rampCollector struct {
	s    *Server
	desc *prometheus.Desc
}

func (c *rampCollector) Describe(ch chan<- *prometheus.Desc) { ch <- c.desc }

func (c *rampCollector) Collect(ch chan<- prometheus.Metric) {
	rt := c.s.rt.Load()
	if rt == nil {
		return
	}
	r, _ := rt.rampAt(c.s.now())
	ch <- prometheus.MustNewConstMetric(c.desc, prometheus.GaugeValue, r, rt.experiment)
}

package status

import (
	"math"
	"sync"

	"github.com/prometheus/client_golang/prometheus"
	dto "github.com/prometheus/client_model/go"
)

// The series a Meter reads; their names and labels are the data plane's,
// feedback's and guardrails' metrics (see DEVELOPERS.md).
const (
	metricBackendLatency = "riffle_backend_request_duration_seconds"
	metricBackendErrors  = "riffle_backend_errors_total"
	metricRequests       = "riffle_proxy_requests_total"
	metricEventsAccepted = "riffle_feedback_events_accepted_total"
)

// Quantiles are a backend's call latencies over one sampling interval, in
// seconds, estimated from the histogram's buckets by linear interpolation
// within the bucket (as Prometheus's histogram_quantile does).
type Quantiles struct {
	P50 float64 `json:"p50"`
	P99 float64 `json:"p99"`
	// Calls counts the calls in the interval.
	Calls uint64 `json:"calls"`
}

// Totals are the running counts since the process started.
type Totals struct {
	// Errors counts failed backend calls by backend and kind.
	Errors map[string]map[string]float64 `json:"errors"`
	// IncumbentOnly counts route requests served the incumbent's list
	// alone, by reason (ramp, guardrail, challenger-timeout, ...).
	IncumbentOnly map[string]float64 `json:"incumbent_only"`
	// Events counts feedback events accepted, by type.
	Events map[string]float64 `json:"events"`
}

// Meter reads the process's own metrics: latency quantiles per backend
// over the interval since its previous Sample, and running totals. It is
// safe for concurrent use.
type Meter struct {
	g    prometheus.Gatherer
	mu   sync.Mutex
	prev map[string]*dto.Histogram
}

// NewMeter returns a Meter reading g.
func NewMeter(g prometheus.Gatherer) *Meter { return &Meter{g: g, prev: map[string]*dto.Histogram{}} }

// Latency returns the latency quantiles of every backend that had calls
// since the previous call of Latency.
func (m *Meter) Latency() (map[string]Quantiles, error) {
	lat := map[string]Quantiles{}
	m.mu.Lock()
	defer m.mu.Unlock()
	err := m.each(func(name string, l map[string]string, mt *dto.Metric) {
		if name != metricBackendLatency {
			return
		}
		if q, ok := m.interval(l["backend"], mt.GetHistogram()); ok {
			lat[l["backend"]] = q
		}
	})
	return lat, err
}

// Totals returns the running counts since the process started.
func (m *Meter) Totals() (Totals, error) {
	tot := Totals{Errors: map[string]map[string]float64{}, IncumbentOnly: map[string]float64{}, Events: map[string]float64{}}
	err := m.each(func(name string, l map[string]string, mt *dto.Metric) {
		switch name {
		case metricBackendErrors:
			if tot.Errors[l["backend"]] == nil {
				tot.Errors[l["backend"]] = map[string]float64{}
			}
			tot.Errors[l["backend"]][l["kind"]] += mt.GetCounter().GetValue()
		case metricRequests:
			if l["outcome"] == "incumbent-only" {
				tot.IncumbentOnly[l["reason"]] += mt.GetCounter().GetValue()
			}
		case metricEventsAccepted:
			tot.Events[l["event"]] += mt.GetCounter().GetValue()
		}
	})
	return tot, err
}

// each calls fn for every series gathered.
func (m *Meter) each(fn func(name string, labels map[string]string, mt *dto.Metric)) error {
	fams, err := m.g.Gather()
	if err != nil && len(fams) == 0 {
		return err
	}
	for _, f := range fams {
		for _, mt := range f.GetMetric() {
			fn(f.GetName(), labels(mt), mt)
		}
	}
	return nil
}

// interval returns the quantiles of the calls since the backend's
// previous histogram, and remembers this one.
func (m *Meter) interval(backend string, h *dto.Histogram) (Quantiles, bool) {
	prev := m.prev[backend]
	m.prev[backend] = h
	n := h.GetSampleCount()
	if prev != nil {
		n -= prev.GetSampleCount()
	}
	if h == nil || n == 0 {
		return Quantiles{}, false
	}
	bounds := make([]float64, 0, len(h.GetBucket()))
	counts := make([]float64, 0, len(h.GetBucket()))
	for i, b := range h.GetBucket() {
		c := float64(b.GetCumulativeCount())
		if prev != nil && i < len(prev.GetBucket()) {
			c -= float64(prev.GetBucket()[i].GetCumulativeCount())
		}
		bounds = append(bounds, b.GetUpperBound())
		counts = append(counts, c)
	}
	return Quantiles{P50: quantile(0.5, bounds, counts, float64(n)), P99: quantile(0.99, bounds, counts, float64(n)), Calls: n}, true
}

// quantile estimates the q-quantile of n observations from cumulative
// bucket counts under upper bounds, interpolating linearly inside the
// bucket that holds it; above the last finite bound it returns that bound.
func quantile(q float64, bounds, cum []float64, n float64) float64 {
	rank := q * n
	lower, below := 0.0, 0.0
	for i, ub := range bounds {
		if cum[i] >= rank {
			if math.IsInf(ub, 1) {
				return lower
			}
			in := cum[i] - below
			if in <= 0 {
				return ub
			}
			return lower + (ub-lower)*(rank-below)/in
		}
		lower, below = ub, cum[i]
	}
	return lower
}

func labels(m *dto.Metric) map[string]string {
	out := map[string]string{}
	for _, lp := range m.GetLabel() {
		out[lp.GetName()] = lp.GetValue()
	}
	return out
}

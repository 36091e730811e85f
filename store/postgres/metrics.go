package postgres

import (
	"context"
	"errors"
	"fmt"
	"sync"
	"time"

	"github.com/prometheus/client_golang/prometheus"

	"riffle/merge"
)

// metrics are the store's collectors: the bbolt store's names where they
// apply, and riffle_store_available.
type metrics struct {
	queued, committed, dropped prometheus.Counter
	commitSeconds              prometheus.Histogram
}

func newMetrics(reg prometheus.Registerer, s *Store) (*metrics, error) {
	m := &metrics{
		queued: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "riffle_store_impressions_queued_total",
			Help: "Impressions handed to the store's write queue.",
		}),
		committed: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "riffle_store_impressions_committed_total",
			Help: "Impressions written to the database by this sidecar's writer.",
		}),
		dropped: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "riffle_store_impressions_dropped_total",
			Help: "Impressions not stored: queue full (database slow or down), store closed, no experiment, or refused by the database.",
		}),
		commitSeconds: prometheus.NewHistogram(prometheus.HistogramOpts{
			Name:    "riffle_store_commit_duration_seconds",
			Help:    "Duration of the writer's batch writes (COPY and totals in one transaction).",
			Buckets: []float64{.0005, .001, .002, .005, .01, .02, .05, .1, .25, .5, 1, 2.5},
		}),
	}
	if reg == nil {
		return m, nil
	}
	queue := prometheus.NewGaugeFunc(prometheus.GaugeOpts{
		Name: "riffle_store_queue_length",
		Help: "Impressions waiting in the store's write queue.",
	}, func() float64 { return float64(len(s.queue)) })
	available := prometheus.NewGaugeFunc(prometheus.GaugeOpts{
		Name: "riffle_store_available",
		Help: "1 while the store answers, 0 while its database is down or unreachable (the data plane keeps serving).",
	}, func() float64 {
		if s.Available() {
			return 1
		}
		return 0
	})
	outcomes := &fleetOutcomes{s: s, desc: prometheus.NewDesc("riffle_impression_outcomes_total",
		"Finalised interleaved impressions by outcome. scope=\"fleet\": the whole fleet's totals read from the shared database, the same on every sidecar (take max, not sum, over sidecars).",
		[]string{"experiment", "outcome"}, prometheus.Labels{"scope": "fleet"})}
	for _, c := range []prometheus.Collector{m.queued, m.committed, m.dropped, m.commitSeconds, queue, available, outcomes} {
		if err := reg.Register(c); err != nil {
			var are prometheus.AlreadyRegisteredError
			if errors.As(err, &are) {
				return nil, fmt.Errorf("register metrics (one store per registry): %w", err)
			}
			return nil, fmt.Errorf("register metrics: %w", err)
		}
	}
	return m, nil
}

// fleetOutcomes exports the fleet's outcome totals at scrape time, read at
// most once a second; while the database is down it repeats the last
// totals read (they only grow), and before any read it exports nothing.
type fleetOutcomes struct {
	s    *Store
	desc *prometheus.Desc

	mu   sync.Mutex
	at   time.Time
	last map[string][4]int64
}

// Describe implements prometheus.Collector.
func (c *fleetOutcomes) Describe(ch chan<- *prometheus.Desc) { ch <- c.desc }

// Collect implements prometheus.Collector.
func (c *fleetOutcomes) Collect(ch chan<- prometheus.Metric) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if time.Since(c.at) >= time.Second {
		ctx, cancel := context.WithTimeout(context.Background(), min(c.s.opt.Timeout, 2*time.Second))
		totals, err := c.s.outcomeTotals(ctx)
		cancel()
		if err == nil {
			c.last, c.at = totals, time.Now()
		}
	}
	for name, o := range c.last {
		for i, n := range o {
			ch <- prometheus.MustNewConstMetric(c.desc, prometheus.CounterValue, float64(n), name, merge.Outcome(i).String())
		}
	}
}

package store

import (
	"errors"
	"fmt"

	"github.com/prometheus/client_golang/prometheus"
	bolt "go.etcd.io/bbolt"

	"riffle/merge"
)

// metrics are the store's Prometheus collectors. They exist whether or not
// a Registerer was given, so the code that updates them needs no checks.
type metrics struct {
	queued, committed, dropped prometheus.Counter
	commitSeconds              prometheus.Histogram
	outcomes                   *prometheus.CounterVec
}

// newMetrics builds the collectors and registers them on reg (nil: none).
func newMetrics(reg prometheus.Registerer, s *Store) (*metrics, error) {
	m := &metrics{
		queued: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "riffle_store_impressions_queued_total",
			Help: "Impressions handed to the store's write queue.",
		}),
		committed: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "riffle_store_impressions_committed_total",
			Help: "Impressions written to the store file by a group commit.",
		}),
		dropped: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "riffle_store_impressions_dropped_total",
			Help: "Impressions not stored: queue full, store closed, no experiment, or a failed commit.",
		}),
		commitSeconds: prometheus.NewHistogram(prometheus.HistogramOpts{
			Name:    "riffle_store_commit_duration_seconds",
			Help:    "Duration of the writer's group commits, fsync included.",
			Buckets: []float64{.0005, .001, .002, .005, .01, .02, .05, .1, .25, .5, 1, 2.5},
		}),
		// The counter starts at the totals stored in the file, not at 0, so
		// a restarted sidecar continues its series instead of resetting it,
		// and the sum over every sidecar's series is the fleet's total.
		outcomes: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "riffle_impression_outcomes_total",
			Help: "Finalised interleaved impressions by outcome, starting from the totals stored in this sidecar's file.",
		}, []string{"experiment", "outcome"}),
	}
	if reg == nil {
		return m, nil
	}
	queue := prometheus.NewGaugeFunc(prometheus.GaugeOpts{
		Name: "riffle_store_queue_length",
		Help: "Impressions waiting in the store's write queue.",
	}, func() float64 { return float64(len(s.queue)) })
	for _, c := range []prometheus.Collector{m.queued, m.committed, m.dropped, m.commitSeconds, m.outcomes, queue} {
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

// touchExperiment makes every outcome series of the experiment exist.
func (m *metrics) touchExperiment(name string) {
	for o := merge.NoFeedback; o <= merge.Tie; o++ {
		m.outcomes.WithLabelValues(name, o.String())
	}
}

// addOutcomes adds per-experiment outcome counts.
func (m *metrics) addOutcomes(counted map[string]*[4]int64) {
	for name, c := range counted {
		for o, n := range c {
			m.outcomes.WithLabelValues(name, merge.Outcome(o).String()).Add(float64(n))
		}
	}
}

// initOutcomeMetrics starts the outcome counters at the stored totals.
func (s *Store) initOutcomeMetrics() error {
	counted := make(map[string]*[4]int64)
	err := s.view(func(tx *bolt.Tx) error {
		root := tx.Bucket(bucketExp)
		return root.ForEachBucket(func(name []byte) error {
			t, err := decodeTotals(string(name), root.Bucket(name).Get(keyTotals))
			if err != nil {
				return err
			}
			counted[string(name)] = &t.Outcomes
			return nil
		})
	})
	if err != nil {
		return fmt.Errorf("store %s: read totals: %w", s.path, err)
	}
	for name := range counted {
		s.m.touchExperiment(name)
	}
	s.m.addOutcomes(counted)
	return nil
}

package guard

import (
	"errors"
	"log/slog"

	"github.com/prometheus/client_golang/prometheus"
)

// metrics are the guardrail series, one per guardrail name.
type metrics struct {
	tripped *prometheus.GaugeVec
	trips   *prometheus.CounterVec
}

func newMetrics(reg prometheus.Registerer, log *slog.Logger) *metrics {
	m := &metrics{
		tripped: prometheus.NewGaugeVec(prometheus.GaugeOpts{
			Name: "riffle_guardrail_tripped",
			Help: "1 while the guardrail has halted the challenger (effective ramp 0), else 0.",
		}, []string{"guardrail"}),
		trips: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "riffle_guardrail_trips_total",
			Help: "Times the guardrail has tripped and halted the challenger.",
		}, []string{"guardrail"}),
	}
	if reg != nil {
		m.tripped = register(reg, m.tripped, log)
		m.trips = register(reg, m.trips, log)
	}
	for _, name := range guardrails() {
		m.tripped.WithLabelValues(name)
		m.trips.WithLabelValues(name)
	}
	return m
}

// register registers c on reg; when an identical collector is already there
// (a second Guard on the same registry) it returns that one, so both share
// the series instead of failing. Any other error is logged and leaves c
// unregistered: the guardrails still work, only their series are missing
// from the scrape.
func register[C prometheus.Collector](reg prometheus.Registerer, c C, log *slog.Logger) C {
	err := reg.Register(c)
	if err == nil {
		return c
	}
	if are, ok := errors.AsType[prometheus.AlreadyRegisteredError](err); ok {
		if existing, ok := are.ExistingCollector.(C); ok {
			return existing
		}
	}
	log.Error("guardrail metrics not registered", "error", err)
	return c
}

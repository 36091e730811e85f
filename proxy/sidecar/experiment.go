package sidecar

import (
	"context"
	"errors"
	"fmt"
	"sync"
	"time"

	"github.com/prometheus/client_golang/prometheus"

	"riffle/merge"
	"riffle/merge/verdict"
	"riffle/proxy/config"
	"riffle/proxy/guard"
	"riffle/proxy/status"
	"riffle/store"
)

// Status is the experiment status of GET /api/v1/experiment: the verdict
// package's status (DESIGN.md's Interface keys and more) plus the
// guardrail state.
type Status struct {
	verdict.Status
	Guardrail GuardrailState `json:"guardrail"`
	Store     StoreState     `json:"store"`
}

// StoreState says whether the counts could be read from the store. While
// it is unavailable (a shared database down) the status repeats the last
// counts read, and says since when they are stale.
type StoreState struct {
	Available bool `json:"available"`
	// Error is why the last read failed; empty while available.
	Error string `json:"error,omitempty"`
	// Since is when the store became unavailable.
	Since *time.Time `json:"since,omitempty"`
}

// GuardrailState says whether a guardrail has halted the challenger.
type GuardrailState struct {
	Tripped bool `json:"tripped"`
	guard.Trip
}

// readTimeout bounds one read of the experiment's counts, so that a slow
// database cannot hold up the API, the status page or a scrape.
const readTimeout = 2 * time.Second

// experiment computes the live status from the store, caches it briefly
// (a dashboard polling every second must not rescan the per-user
// aggregates each time), samples it into the status page's history and
// sets the live Delta gauges.
type experiment struct {
	store   store.Reader
	history *status.History
	current func() *config.Config
	ramp    func() float64
	guard   *guard.Guard
	page    *statusPage

	mu     sync.Mutex
	cached Status
	at     time.Time
	// running is the verdict's running state, carried from look to look
	// in memory (not yet persisted in the store: a restart starts it
	// afresh), so the live verdict only moves from undecided once.
	running verdict.Running
	runFor  string // the experiment running belongs to
}

func newExperiment(st store.Reader, reg prometheus.Registerer) *experiment {
	e := &experiment{store: st, history: status.NewHistory(0)}
	reg.MustRegister(deltaCollector{e: e,
		delta: prometheus.NewDesc("riffle_experiment_delta", "Preference statistic Delta of the challenger over the incumbent on finalised impressions.", []string{"experiment"}, nil),
		lower: prometheus.NewDesc("riffle_experiment_delta_lower", "Lower end of the interval for Delta at 1 - alpha.", []string{"experiment"}, nil),
		upper: prometheus.NewDesc("riffle_experiment_delta_upper", "Upper end of the interval for Delta at 1 - alpha.", []string{"experiment"}, nil),
	})
	return e
}

// deltaCollector exports the live Delta and its interval when scraped,
// from the status cached for at most a second, so the gauges never lag
// the API.
type deltaCollector struct {
	e                   *experiment
	delta, lower, upper *prometheus.Desc
}

// Describe implements prometheus.Collector.
func (c deltaCollector) Describe(ch chan<- *prometheus.Desc) {
	ch <- c.delta
	ch <- c.lower
	ch <- c.upper
}

// Collect implements prometheus.Collector; it exports nothing while the
// status cannot be computed.
func (c deltaCollector) Collect(ch chan<- prometheus.Metric) {
	if c.e.current == nil {
		return
	}
	st, err := c.e.status()
	if err != nil {
		return
	}
	ch <- prometheus.MustNewConstMetric(c.delta, prometheus.GaugeValue, st.Delta, st.Experiment)
	ch <- prometheus.MustNewConstMetric(c.lower, prometheus.GaugeValue, st.CI[0], st.Experiment)
	ch <- prometheus.MustNewConstMetric(c.upper, prometheus.GaugeValue, st.CI[1], st.Experiment)
}

// status returns the current status, computed at most once a second.
func (e *experiment) status() (Status, error) {
	e.mu.Lock()
	defer e.mu.Unlock()
	if time.Since(e.at) < time.Second {
		return e.cached, nil
	}
	cfg := e.current()
	ctx, cancel := context.WithTimeout(context.Background(), readTimeout)
	defer cancel()
	agg, err := e.store.Aggregate(ctx, cfg.Experiment.Name)
	if errors.Is(err, store.ErrUnavailable) {
		return e.stale(err), nil
	}
	if err != nil {
		return Status{}, fmt.Errorf("experiment %s: %w", cfg.Experiment.Name, err)
	}
	if agg.Experiment == "" {
		agg.Experiment = cfg.Experiment.Name
	}
	if agg.Policy == "" {
		agg.Policy = cfg.Experiment.Policy
	}
	in := agg.Input(paramsOf(cfg))
	ramp := e.ramp()
	in.Ramp = &ramp
	if e.runFor != cfg.Experiment.Name {
		e.running, e.runFor = verdict.Running{}, cfg.Experiment.Name
	}
	in.Running, in.Now, in.ConfigHash = e.running, time.Now(), cfg.Hash()
	vs, err := verdict.Compute(in)
	if err != nil {
		return Status{}, fmt.Errorf("experiment %s: %w", cfg.Experiment.Name, err)
	}
	e.running = vs.Running
	st := Status{Status: vs, Store: StoreState{Available: true}}
	st.Guardrail.Tripped, st.Guardrail.Trip = e.guard.Tripped()
	e.cached, e.at = st, time.Now()
	return st, nil
}

// stale is the last status computed, marked as read before the store
// became unavailable (zero counts when none was computed yet). It is
// cached like a fresh one, so a dashboard does not hammer a down database.
func (e *experiment) stale(err error) Status {
	st := e.cached
	since := time.Now()
	if !st.Store.Available && st.Store.Since != nil {
		since = *st.Store.Since
	}
	st.Store = StoreState{Available: false, Error: err.Error(), Since: &since}
	st.Guardrail.Tripped, st.Guardrail.Trip = e.guard.Tripped()
	e.cached, e.at = st, time.Now()
	return st
}

// losing is the losing guardrail's check: the always-valid test says the
// challenger is significantly worse.
func (e *experiment) losing() (bool, string) {
	st, err := e.status()
	if err != nil || st.Verdict != verdict.IncumbentBetter {
		return false, ""
	}
	return true, fmt.Sprintf("incumbent-better: %s (Delta %.4f, always-valid p %.4g)", st.Reason, st.Delta, st.PValue)
}

// sample records the status every interval until ctx ends.
func (e *experiment) sample(ctx context.Context, every time.Duration) {
	t := time.NewTicker(every)
	defer t.Stop()
	for {
		e.record()
		select {
		case <-ctx.Done():
			return
		case <-t.C:
		}
	}
}

func (e *experiment) record() {
	st, err := e.status()
	if err != nil {
		return
	}
	e.history.Add(e.page.point(st, time.Now()))
}

// rulesOf are the store's attribution rules from a config.
func rulesOf(cfg *config.Config) store.Rules {
	opts := merge.Options{Tau: cfg.Experiment.Tau, Credit: cfg.Experiment.Credit}
	return store.Rules{
		Window: cfg.Experiment.Window,
		Events: cfg.Experiment.Events,
		Eta:    cfg.Experiment.Debias.Eta,
		Policy: func(name string) (merge.Policy, error) { return merge.New(name, opts) },
	}
}

// paramsOf are the statistics' settings from a config.
func paramsOf(cfg *config.Config) verdict.Params {
	e := cfg.Experiment
	return verdict.Params{Alpha: e.Alpha, Power: e.Power, MDE: e.MDE, Margin: e.Margin}
}

// guardOptions are the guardrails' settings from a config; the base ramp
// follows the staged schedule from the experiment's start.
func guardOptions(cfg *config.Config, s *Sidecar) guard.Options {
	g := cfg.Experiment.Guardrails
	o := guard.Options{
		ErrorRate: g.ErrorRate, LatencyP99: g.LatencyP99, Window: g.Window, MinRequests: g.MinRequests,
		Base: func(now time.Time) float64 {
			return s.reloader.Current().EffectiveRamp(now, time.Unix(0, s.start.Load()))
		},
		Registerer: s.reg, Logger: s.log,
	}
	if g.Losing {
		o.Losing = s.exp.losing
	}
	return o
}

// experimentStart is when the ramp schedule counts from: the config's
// experiment.start, else the first time the store saw the experiment, else
// now.
func experimentStart(st store.Reader, cfg *config.Config, now time.Time) time.Time {
	if !cfg.Experiment.Start.IsZero() {
		return cfg.Experiment.Start
	}
	ctx, cancel := context.WithTimeout(context.Background(), readTimeout)
	defer cancel()
	if agg, err := st.Aggregate(ctx, cfg.Experiment.Name); err == nil && !agg.Start.IsZero() {
		return agg.Start
	}
	return now
}

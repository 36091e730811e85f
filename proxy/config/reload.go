package config

import (
	"crypto/sha256"
	"errors"
	"fmt"
	"log/slog"
	"os"
	"slices"
	"sync"
	"sync/atomic"
	"time"

	"github.com/prometheus/client_golang/prometheus"
)

// ReloaderOptions tunes a Reloader. Zero fields get the documented defaults.
type ReloaderOptions struct {
	// Registerer receives the reload metrics. If nil, they are kept but not
	// registered anywhere.
	Registerer prometheus.Registerer
	// Logger receives a record for every reload and every problem found. If
	// nil, slog.Default() is used.
	Logger *slog.Logger
	// Now returns the current time. If nil, time.Now is used.
	Now func() time.Time
	// Debounce is how long Watch waits after the last event of a burst
	// before it looks at the file. Default 100ms.
	Debounce time.Duration
	// Poll, when positive, makes Watch also look at the file at this
	// interval, for file systems that deliver no change events. Zero means
	// events only.
	Poll time.Duration
}

// ReloadStatus is what a Reloader reports about its config, for
// GET /api/v1/config.
type ReloadStatus struct {
	// Hash is the loaded config's Hash.
	Hash string `json:"hash"`
	// LoadedAt is when the loaded config was swapped in.
	LoadedAt time.Time `json:"loaded_at"`
	// LastAttempt is when Reload last ran; zero if it never has.
	LastAttempt time.Time `json:"last_attempt,omitzero"`
	// LastError is why the last attempt failed; empty if it succeeded.
	LastError string `json:"last_error,omitempty"`
	// Problems are the last failed attempt's problems with their key
	// paths, when it failed on the file's content.
	Problems []Problem `json:"problems,omitempty"`
}

// Reloader holds the current config and replaces it from its file on
// request: it loads and validates the file, refuses changes that need a
// restart, lets the caller take the new config into use, and only then swaps
// it in. On any failure the old config stays. Its methods are safe for
// concurrent use; reloads are serialised.
type Reloader struct {
	path     string
	apply    func(*Config) error
	log      *slog.Logger
	now      func() time.Time
	debounce time.Duration
	poll     time.Duration
	metrics  reloadMetrics

	cur atomic.Pointer[Config]

	mu     sync.Mutex // serialises Reload; guards status and seen
	status ReloadStatus
	seen   *[sha256.Size]byte // content hash of the bytes Reload last read
}

type reloadMetrics struct {
	reloads     *prometheus.CounterVec
	info        *prometheus.GaugeVec
	lastSuccess prometheus.Gauge
}

// NewReloader returns a Reloader for the file at path. initial is the config
// already in use (it is not passed to apply); it may be nil, in which case
// Current returns nil until the first successful Reload. apply takes a new
// config into use and may refuse it with an error; nil means nothing to do.
// NewReloader panics if the metrics cannot be registered on o.Registerer,
// for instance because another Reloader registered them there already.
func NewReloader(path string, initial *Config, apply func(*Config) error, o ReloaderOptions) *Reloader {
	r := &Reloader{path: path, apply: apply, log: o.Logger, now: o.Now, debounce: o.Debounce, poll: o.Poll}
	if r.apply == nil {
		r.apply = func(*Config) error { return nil }
	}
	if r.log == nil {
		r.log = slog.Default()
	}
	if r.now == nil {
		r.now = time.Now
	}
	if r.debounce <= 0 {
		r.debounce = 100 * time.Millisecond
	}
	r.metrics = newReloadMetrics(o.Registerer)
	if initial != nil {
		r.swap(initial, r.now())
	}
	return r
}

func newReloadMetrics(reg prometheus.Registerer) reloadMetrics {
	m := reloadMetrics{
		reloads: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "riffle_config_reloads_total",
			Help: "Config reload attempts by result (success or failure).",
		}, []string{"result"}),
		info: prometheus.NewGaugeVec(prometheus.GaugeOpts{
			Name: "riffle_config_info",
			Help: "Always 1, labelled with the hash of the config in force.",
		}, []string{"hash"}),
		lastSuccess: prometheus.NewGauge(prometheus.GaugeOpts{
			Name: "riffle_config_last_reload_success_timestamp_seconds",
			Help: "Unix time at which the config in force was loaded.",
		}),
	}
	m.reloads.WithLabelValues("success")
	m.reloads.WithLabelValues("failure")
	if reg != nil {
		for _, c := range []prometheus.Collector{m.reloads, m.info, m.lastSuccess} {
			if err := reg.Register(c); err != nil {
				panic(fmt.Sprintf("config: register reload metrics: %v", err))
			}
		}
	}
	return m
}

// Path returns the file the Reloader loads.
func (r *Reloader) Path() string { return r.path }

// Current returns the config in force. Callers keep the pointer for the
// duration of one request so that it runs on one config throughout.
func (r *Reloader) Current() *Config { return r.cur.Load() }

// Status reports the config in force and the last reload attempt.
func (r *Reloader) Status() ReloadStatus {
	r.mu.Lock()
	defer r.mu.Unlock()
	s := r.status
	s.Problems = slices.Clone(s.Problems)
	return s
}

// Reload loads the file, validates it, refuses restart-only changes, calls
// apply and swaps the new config in. On failure the old config stays in
// force, the failure is counted and logged with every problem, and the
// error is returned: an *Error matching ErrInvalid or ErrNeedsRestart for
// the file's content, or a wrapped read or apply error.
func (r *Reloader) Reload() error {
	r.mu.Lock()
	defer r.mu.Unlock()
	now := r.now()
	r.status.LastAttempt = now
	next, err := r.load()
	if err == nil {
		if err = r.apply(next); err != nil {
			err = fmt.Errorf("config: apply %s: %w", r.path, err)
		}
	}
	if err != nil {
		r.fail(err)
		return err
	}
	r.swap(next, now)
	r.metrics.reloads.WithLabelValues("success").Inc()
	r.log.Info("config reloaded", "file", r.path, "hash", r.status.Hash)
	return nil
}

// load reads and checks the file; r.mu is held.
func (r *Reloader) load() (*Config, error) {
	data, err := os.ReadFile(r.path)
	if err != nil {
		return nil, fmt.Errorf("config: reload %s: %w", r.path, err)
	}
	sum := sha256.Sum256(data)
	r.seen = &sum
	next, err := Parse(data, r.path)
	if err != nil {
		return nil, err
	}
	if old := r.cur.Load(); old != nil {
		if ps := RestartOnly(old, next); len(ps) > 0 {
			return nil, &Error{Source: r.path, Problems: ps, Restart: true}
		}
	}
	return next, nil
}

// swap puts c in force; r.mu is held or r is not yet shared.
func (r *Reloader) swap(c *Config, now time.Time) {
	h := c.Hash()
	if r.status.Hash != "" && r.status.Hash != h {
		r.metrics.info.DeleteLabelValues(r.status.Hash)
	}
	r.metrics.info.WithLabelValues(h).Set(1)
	r.metrics.lastSuccess.Set(float64(now.UnixNano()) / 1e9)
	r.cur.Store(c)
	r.status = ReloadStatus{Hash: h, LoadedAt: now, LastAttempt: r.status.LastAttempt}
}

// fail records a failed attempt; r.mu is held.
func (r *Reloader) fail(err error) {
	r.metrics.reloads.WithLabelValues("failure").Inc()
	r.status.LastError = err.Error()
	r.status.Problems = nil
	var ce *Error
	if !errors.As(err, &ce) {
		r.log.Warn("config reload failed; keeping the config in force", "file", r.path, "error", err)
		return
	}
	r.status.Problems = slices.Clone(ce.Problems)
	msg := "config reload rejected; keeping the config in force"
	if ce.Restart {
		msg = "config reload needs a restart; keeping the config in force"
	}
	for _, p := range ce.Problems {
		r.log.Warn(msg, "file", r.path, "line", p.Line, "key", p.Path, "problem", p.Message)
	}
}

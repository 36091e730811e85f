// Package guard halts a challenger automatically when it fails too often,
// answers too slowly, or is significantly losing, and gives the proxy the
// effective ramp: zero while a guardrail is tripped, the schedule's ramp
// otherwise.
//
// A Guard is safe for concurrent use. ObserveChallenger, called on every
// challenger request, does a few atomic additions and takes no lock except
// once per bucket of the sliding window, when the window moves on.
package guard

import (
	"context"
	"log/slog"
	"sync"
	"sync/atomic"
	"time"

	"github.com/prometheus/client_golang/prometheus"
)

// Names of the guardrails, as used in the guardrail label of the metrics, in
// logs and in Trip.Guardrail.
const (
	// ErrorRateGuardrail trips on the challenger's share of failed calls.
	ErrorRateGuardrail = "error-rate"
	// LatencyGuardrail trips on the challenger's 99th-percentile latency.
	LatencyGuardrail = "latency-p99"
	// LosingGuardrail trips when the statistics say the challenger is
	// significantly worse.
	LosingGuardrail = "losing"
)

// guardrails lists every guardrail, so each one's metrics exist from the start.
func guardrails() [3]string {
	return [...]string{ErrorRateGuardrail, LatencyGuardrail, LosingGuardrail}
}

// Options configures a Guard. Zero fields get the documented defaults.
type Options struct {
	// ErrorRate trips the error-rate guardrail when the share of the
	// challenger's calls over Window that failed exceeds it. Zero or
	// negative disables the guardrail.
	ErrorRate float64
	// LatencyP99 trips the latency guardrail when the 99th percentile of the
	// challenger's call durations over Window exceeds it, that is when more
	// than 1% of the calls took longer. Failed calls count with the time
	// they took. Zero or negative disables the guardrail.
	LatencyP99 time.Duration
	// Window is the sliding window of the two guardrails above. If zero or
	// negative, one minute. See the package's window.go for its resolution.
	Window time.Duration
	// MinRequests is how many challenger calls Window must hold before
	// either of them may trip. If zero or negative, 100.
	MinRequests int
	// Losing, when non-nil, is asked by Check whether the challenger is
	// significantly worse, with the reason in words; true trips the losing
	// guardrail. It may be slow: only Check calls it. Nil disables the
	// guardrail.
	Losing func() (bool, string)
	// Base gives the ramp the schedule sets at a time, in [0,1]; Ramp
	// returns it while no guardrail is tripped. If nil, the ramp is 1.
	Base func(now time.Time) float64
	// Interval is how often Run calls Check. If zero or negative, one second.
	Interval time.Duration

	// Now reads the clock. If nil, time.Now. Fixed at New: SetOptions
	// ignores it.
	Now func() time.Time
	// Registerer receives the guardrail metrics. If nil they are kept but
	// not registered. Fixed at New.
	Registerer prometheus.Registerer
	// Logger receives trips and resets. If nil, nothing is logged. Fixed
	// at New.
	Logger *slog.Logger
}

// withDefaults returns o with its zero fields filled.
func (o Options) withDefaults() Options {
	if o.Window <= 0 {
		o.Window = time.Minute
	}
	if o.MinRequests <= 0 {
		o.MinRequests = 100
	}
	if o.Interval <= 0 {
		o.Interval = time.Second
	}
	return o
}

// Trip says which guardrail halted the challenger, why, and when.
type Trip struct {
	// Guardrail is one of ErrorRateGuardrail, LatencyGuardrail and
	// LosingGuardrail.
	Guardrail string `json:"guardrail"`
	// Reason says in words what was seen.
	Reason string `json:"reason"`
	// At is when the guardrail tripped.
	At time.Time `json:"at,omitzero"`
}

// Guard watches the challenger and gates its ramp. Create it with New.
type Guard struct {
	now func() time.Time
	log *slog.Logger
	m   *metrics

	// mu serialises trips, resets and option changes, so that a trip worked
	// out on a window that a reset has since replaced is not applied.
	mu    sync.Mutex
	state atomic.Pointer[state]
	trip  atomic.Pointer[Trip]
}

// state is what SetOptions and Reset replace as a whole.
type state struct {
	o   Options
	win *window
}

// New returns a Guard with no guardrail tripped.
func New(o Options) *Guard {
	g := &Guard{now: o.Now, log: o.Logger}
	if g.now == nil {
		g.now = time.Now
	}
	if g.log == nil {
		g.log = slog.New(slog.DiscardHandler)
	}
	g.m = newMetrics(o.Registerer, g.log)
	g.state.Store(newState(o))
	return g
}

func newState(o Options) *state {
	o = o.withDefaults()
	return &state{o: o, win: newWindow(o.Window, o.LatencyP99)}
}

// Ramp returns the share of users to interleave at now: 0 while a guardrail
// is tripped, else Options.Base(now) clamped to [0,1].
func (g *Guard) Ramp(now time.Time) float64 {
	if g.trip.Load() != nil {
		return 0
	}
	base := g.state.Load().o.Base
	if base == nil {
		return 1
	}
	r := base(now)
	switch {
	case r > 1:
		return 1
	case r >= 0:
		return r
	}
	return 0 // negative or NaN
}

// ObserveChallenger records one challenger call that took d and failed when
// err is non-nil. A failed or slow call also evaluates the error-rate and
// latency guardrails at once, so a failing challenger is halted on the call
// that crosses the threshold rather than at the next Check.
func (g *Guard) ObserveChallenger(d time.Duration, err error) {
	st := g.state.Load()
	o := &st.o
	if o.ErrorRate <= 0 && o.LatencyP99 <= 0 {
		return
	}
	now := g.now()
	failed := err != nil
	if !st.win.add(now, d, failed) {
		return
	}
	bad := (failed && o.ErrorRate > 0) || (o.LatencyP99 > 0 && d > o.LatencyP99)
	if bad && g.trip.Load() == nil {
		g.checkWindow(st, now)
	}
}

// Check evaluates every guardrail, trips the first one whose condition
// holds, and reports whether a guardrail is tripped afterwards.
func (g *Guard) Check() bool {
	if g.trip.Load() != nil {
		return true
	}
	st := g.state.Load()
	now := g.now()
	g.checkWindow(st, now)
	if st.o.Losing != nil && g.trip.Load() == nil {
		if losing, why := st.o.Losing(); losing {
			g.tripOn(st, LosingGuardrail, why, now)
		}
	}
	return g.trip.Load() != nil
}

// checkWindow evaluates the error-rate and latency guardrails on st's window.
func (g *Guard) checkWindow(st *state, now time.Time) {
	o := &st.o
	if o.ErrorRate <= 0 && o.LatencyP99 <= 0 {
		return
	}
	c := st.win.sum(now)
	if c.calls < uint64(o.MinRequests) {
		return
	}
	if o.ErrorRate > 0 && float64(c.errors) > o.ErrorRate*float64(c.calls) {
		g.tripOn(st, ErrorRateGuardrail, errorReason(c, o), now)
		return
	}
	// p99 > bound exactly when more than 1% of the calls took longer.
	if o.LatencyP99 > 0 && 100*c.slow > c.calls {
		g.tripOn(st, LatencyGuardrail, latencyReason(c, o, st.win), now)
	}
}

// tripOn trips the named guardrail unless one is already tripped or st has
// been replaced by a reset or reload since it was evaluated.
func (g *Guard) tripOn(st *state, name, reason string, at time.Time) {
	g.mu.Lock()
	defer g.mu.Unlock()
	if g.state.Load() != st || g.trip.Load() != nil {
		return
	}
	g.trip.Store(&Trip{Guardrail: name, Reason: reason, At: at})
	g.m.tripped.WithLabelValues(name).Set(1)
	g.m.trips.WithLabelValues(name).Inc()
	g.log.Warn("guardrail tripped: challenger halted until a reset or reload",
		"guardrail", name, "reason", reason)
}

// Tripped reports whether a guardrail is tripped, and which one and why.
func (g *Guard) Tripped() (bool, Trip) {
	if t := g.trip.Load(); t != nil {
		return true, *t
	}
	return false, Trip{}
}

// Reset clears a trip and empties the sliding window, so the calls that
// tripped it do not trip it again; Ramp returns the base ramp again.
func (g *Guard) Reset() {
	g.replace(g.state.Load().o, "reset")
}

// SetOptions replaces the thresholds, Window, MinRequests, Losing, Base and
// Interval with o's, as on a config reload, and like Reset clears any trip
// and empties the window. o's Now, Registerer and Logger are ignored.
func (g *Guard) SetOptions(o Options) {
	g.replace(o, "reload")
}

func (g *Guard) replace(o Options, why string) {
	g.mu.Lock()
	defer g.mu.Unlock()
	g.state.Store(newState(o))
	old := g.trip.Swap(nil)
	for _, name := range guardrails() {
		g.m.tripped.WithLabelValues(name).Set(0)
	}
	if old != nil {
		g.log.Info("guardrail cleared: challenger resumes", "guardrail", old.Guardrail, "by", why)
	}
}

// Run calls Check every Options.Interval until ctx ends.
func (g *Guard) Run(ctx context.Context) {
	t := time.NewTimer(g.state.Load().o.Interval)
	defer t.Stop()
	for {
		select {
		case <-ctx.Done():
			return
		case <-t.C:
			g.Check()
			t.Reset(g.state.Load().o.Interval)
		}
	}
}

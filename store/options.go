package store

import (
	"fmt"
	"log/slog"
	"maps"
	"time"

	"github.com/prometheus/client_golang/prometheus"

	"riffle/merge"
)

// Options configures Open. A nil *Options means all defaults.
type Options struct {
	// ReadOnly opens the file with a shared lock for reading only: Record,
	// AddEvents and Finalize fail, and no background goroutine runs.
	ReadOnly bool
	// Timeout bounds the wait for the file's lock. Default 1s.
	Timeout time.Duration
	// QueueSize is the capacity of the impression queue. Default 65536.
	QueueSize int
	// Batch is the most impressions one group commit writes. Default 1024.
	Batch int
	// Interval is the longest a queued impression waits for its commit.
	// Default 50ms. Every commit costs two fdatasyncs whatever its size
	// (about 0.6 ms of CPU each on the bench machine, see BenchmarkRecord),
	// so under steady load the interval sets the commit rate: 5ms meant up
	// to 200 commits a second, 50ms means 20. Feedback events and Flush
	// do not wait for it: they commit the queue at once.
	Interval time.Duration
	// FinalizeEvery is how often the background pass finalises closed
	// impressions and applies Retention. Default 1s; negative disables the
	// pass (tests call Finalize and Retain themselves).
	FinalizeEvery time.Duration
	// Rules are the experiment's attribution rules; see Rules for defaults.
	Rules Rules
	// Retention deletes final impressions (and their events) whose time is
	// older than this; aggregates stay. Zero keeps everything.
	Retention time.Duration
	// Now is the clock. Default time.Now.
	Now func() time.Time
	// Registerer receives the store's metrics. Nil registers none.
	Registerer prometheus.Registerer
	// Logger receives background errors. Default slog.Default().
	Logger *slog.Logger
}

// Rules say which events count, for how long after an impression, and how
// an impression's feedback is credited.
type Rules struct {
	// Window is the attribution window after an impression. Default 30m.
	Window time.Duration
	// Events maps event types to weights. Default {click: 1, purchase: 3}.
	// Only listed types are accepted.
	Events map[string]float64
	// Eta is the position-bias exponent: each event is weighted by
	// 1/p(rank), p(rank) = (1/rank)^Eta. Zero disables debiasing.
	Eta float64
	// Policy resolves a stored policy name to the policy whose Credit
	// scores the impression. Default merge.New(name, merge.Options{}).
	Policy func(name string) (merge.Policy, error)
}

// withDefaults returns a copy of r with zero fields defaulted and its map
// copied, so later changes by the caller cannot reach the store.
func (r Rules) withDefaults() (Rules, error) {
	if r.Window < 0 {
		return r, fmt.Errorf("store: rules: window %v is negative", r.Window)
	}
	if r.Window == 0 {
		r.Window = 30 * time.Minute
	}
	if r.Eta < 0 {
		return r, fmt.Errorf("store: rules: eta %v is negative", r.Eta)
	}
	if len(r.Events) == 0 {
		r.Events = map[string]float64{"click": 1, "purchase": 3}
	} else {
		r.Events = maps.Clone(r.Events)
	}
	for name, w := range r.Events {
		if name == "" || w < 0 {
			return r, fmt.Errorf("store: rules: event %q has weight %v; want a name and a weight >= 0", name, w)
		}
	}
	if r.Policy == nil {
		r.Policy = defaultPolicy
	}
	return r, nil
}

// withDefaults returns a copy of o (nil allowed) with zero fields defaulted.
func (o *Options) withDefaults() (Options, error) {
	var c Options
	if o != nil {
		c = *o
	}
	if c.Timeout <= 0 {
		c.Timeout = time.Second
	}
	if c.QueueSize <= 0 {
		c.QueueSize = 65536
	}
	if c.Batch <= 0 {
		c.Batch = 1024
	}
	if c.Interval <= 0 {
		c.Interval = 50 * time.Millisecond
	}
	if c.FinalizeEvery == 0 {
		c.FinalizeEvery = time.Second
	}
	if c.Retention < 0 {
		return c, fmt.Errorf("store: retention %v is negative", c.Retention)
	}
	if c.Now == nil {
		c.Now = time.Now
	}
	if c.Logger == nil {
		c.Logger = slog.Default()
	}
	r, err := c.Rules.withDefaults()
	if err != nil {
		return c, err
	}
	c.Rules = r
	return c, nil
}

// DefaultOptions returns o with every zero field defaulted and checked, as
// Open applies them; other store implementations use it so that one
// option means the same everywhere.
func DefaultOptions(o Options) (Options, error) { return o.withDefaults() }

// Package storetest is the conformance suite every store.Contract
// implementation passes: the bbolt file in package store and the shared
// PostgreSQL store run the same table-driven cases for retention,
// idempotency, attribution windows, finalisation, per-user sums and
// export, so the two cannot drift apart.
//
// An implementation's test calls Run with a function that opens a fresh,
// empty store with the options given and closes it on cleanup.
package storetest

import (
	"context"
	"encoding/binary"
	"errors"
	"sync"
	"testing"
	"time"

	"riffle/merge"
	"riffle/store"
)

// Opener opens a fresh, empty store with o (a fake clock, no background
// pass, the case's rules and retention) and closes it on t's cleanup.
type Opener func(t *testing.T, o store.Options) store.Contract

// Run runs every case of the suite against the stores open makes, each in
// a subtest of its own.
func Run(t *testing.T, open Opener) {
	t.Run("Windows", func(t *testing.T) { testWindows(t, open) })
	t.Run("Idempotency", func(t *testing.T) { testIdempotency(t, open) })
	t.Run("Finalisation", func(t *testing.T) { testFinalisation(t, open) })
	t.Run("FinaliseBalanced", func(t *testing.T) { testFinaliseBalanced(t, open) })
	t.Run("FinaliseOnce", func(t *testing.T) { testFinaliseOnce(t, open) })
	t.Run("UserSums", func(t *testing.T) { testUserSums(t, open) })
	t.Run("Retention", func(t *testing.T) { testRetention(t, open) })
	t.Run("Export", func(t *testing.T) { testExport(t, open) })
	t.Run("KeptRequest", func(t *testing.T) { testKeptRequest(t, open) })
	t.Run("UnseenExperiment", func(t *testing.T) { testUnseen(t, open) })
}

// T0 is the suite's epoch: an arbitrary fixed instant.
var T0 = time.Date(2026, 5, 2, 8, 0, 0, 0, time.UTC)

// Experiment is the experiment every case's impressions belong to.
const Experiment = "spring-refresh"

// Clock is a settable fake clock.
type Clock struct {
	mu sync.Mutex
	t  time.Time
}

// Now returns the clock's time.
func (c *Clock) Now() time.Time {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.t
}

// Set moves the clock to t.
func (c *Clock) Set(t time.Time) {
	c.mu.Lock()
	c.t = t
	c.mu.Unlock()
}

// fixture is one case's open store and clock.
type fixture struct {
	t   *testing.T
	st  store.Contract
	clk *Clock
}

// newFixture opens a store with rules r and retention keep at T0.
func newFixture(t *testing.T, open Opener, r store.Rules, keep time.Duration) *fixture {
	t.Helper()
	clk := &Clock{t: T0}
	o := store.Options{Now: clk.Now, FinalizeEvery: -1, Rules: r, Retention: keep, Timeout: time.Second}
	return &fixture{t: t, st: open(t, o), clk: clk}
}

// ID returns a deterministic impression id for time at and tag.
func ID(at time.Time, tag uint64) store.ID {
	var id store.ID
	binary.BigEndian.PutUint64(id[:8], uint64(at.UnixNano()))
	binary.BigEndian.PutUint64(id[8:], tag)
	return id
}

// TeamDraft is a 4-slot team-draft impression at time at of the
// incumbent's list A = [a1 a2 a3 b2] and the challenger's B = [b1 b2 a1 a4]
// with the incumbent picking first: a1 (incumbent; ranks 1 in A, 3 in B),
// b1 (challenger; -, 1), a2 (incumbent; 2, -), b2 (challenger; 4, 2).
func TeamDraft(at time.Time, tag, user uint64) *store.Impression {
	id := ID(at, tag)
	return &store.Impression{
		ID: id, Time: at, Experiment: Experiment, User: user,
		Policy: "team-draft", Seed: id.Seed(),
		Slots: []merge.Slot{
			{Item: "a1", Team: merge.Incumbent, RankA: 1, RankB: 3},
			{Item: "b1", Team: merge.Challenger, RankA: 0, RankB: 1},
			{Item: "a2", Team: merge.Incumbent, RankA: 2, RankB: 0},
			{Item: "b2", Team: merge.Challenger, RankA: 4, RankB: 2},
		},
	}
}

// record hands ims to the store and flushes them.
func (f *fixture) record(ims ...*store.Impression) {
	f.t.Helper()
	for _, im := range ims {
		if !f.st.Record(im) {
			f.t.Fatalf("Record(%s) = false", im.ID)
		}
	}
	if err := f.st.Flush(f.t.Context()); err != nil {
		f.t.Fatalf("Flush: %v", err)
	}
}

// add sends one event and returns its error.
func (f *fixture) add(ev store.Event) error {
	f.t.Helper()
	errs := f.st.AddEvents(f.t.Context(), []store.Event{ev})
	if len(errs) != 1 {
		f.t.Fatalf("AddEvents returned %d errors for 1 event", len(errs))
	}
	return errs[0]
}

// mustAdd sends one event that must be recorded.
func (f *fixture) mustAdd(ev store.Event) {
	f.t.Helper()
	if err := f.add(ev); err != nil {
		f.t.Fatalf("AddEvents(%s %s on %s): %v", ev.Type, ev.Item, ev.Impression, err)
	}
}

// finalize finalises at now and checks the count.
func (f *fixture) finalize(now time.Time, want int) {
	f.t.Helper()
	n, err := f.st.Finalize(f.t.Context(), now)
	if err != nil || n != want {
		f.t.Fatalf("Finalize(%v) = %d, %v; want %d, nil", now.Sub(T0), n, err, want)
	}
}

// aggregate returns the experiment's aggregate.
func (f *fixture) aggregate() store.Aggregate {
	f.t.Helper()
	a, err := f.st.Aggregate(f.t.Context(), Experiment)
	if err != nil {
		f.t.Fatalf("Aggregate: %v", err)
	}
	return a
}

// outcomes builds an Outcomes array from counts by outcome.
func outcomes(none, inc, chal, tie int64) [4]int64 {
	var o [4]int64
	o[merge.NoFeedback], o[merge.IncumbentWin], o[merge.ChallengerWin], o[merge.Tie] = none, inc, chal, tie
	return o
}

// is reports whether err matches want (nil matches nil only).
func is(err, want error) bool {
	if want == nil {
		return err == nil
	}
	return errors.Is(err, want)
}

// ctx is a context for calls outside a test's own.
func ctx() context.Context { return context.Background() }

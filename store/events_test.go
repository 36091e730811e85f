package store

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"
)

// TestAddEventsRejects gives every rejection reason its own case. Each case
// runs on a fresh store holding one open team-draft impression served at
// t0 (window 30m), plus whatever setup the case adds.
func TestAddEventsRejects(t *testing.T) {
	im := teamDraftImpression(t0, 1, 0)
	ok := Event{Impression: im.ID, Item: "b1", Type: "click", Time: t0.Add(time.Minute)}
	with := func(f func(*Event)) Event { e := ok; f(&e); return e }
	tests := []struct {
		name  string
		setup func(t *testing.T, st *Store)
		ev    Event
		want  error
		says  string
	}{
		{"no item", nil, with(func(e *Event) { e.Item = "" }), ErrBadEvent, "item and event type are required"},
		{"key too long", nil, with(func(e *Event) { e.Key = strings.Repeat("k", MaxKeyLen+1) }), ErrBadEvent, "the limit is 256"},
		{"unknown impression", nil, with(func(e *Event) { e.Impression = fixedID(t0, 99) }), ErrUnknownImpression, fixedID(t0, 99).String()},
		{"unknown event type", nil, with(func(e *Event) { e.Type = "wishlist" }), ErrUnknownEvent, "known: click, purchase"},
		{"item not shown", nil, with(func(e *Event) { e.Item = "hose" }), ErrItemNotShown, `"hose"`},
		{"before the impression", nil, with(func(e *Event) { e.Time = t0.Add(-time.Second) }), ErrTooEarly, "served at 2026-03-14T09:00:00Z"},
		{"after the window", nil, with(func(e *Event) { e.Time = t0.Add(30*time.Minute + time.Nanosecond) }), ErrTooLate, "closed at 2026-03-14T09:30:00Z"},
		{"impression already final", func(t *testing.T, st *Store) {
			if n, err := st.Finalize(context.Background(), t0.Add(time.Hour)); n != 1 || err != nil {
				t.Fatalf("Finalize = %d, %v; want 1, nil", n, err)
			}
		}, ok, ErrTooLate, "already final"},
		{"same impression, item, event, no key", func(t *testing.T, st *Store) {
			mustAdd(t, st, with(func(e *Event) { e.Time = t0.Add(2 * time.Minute) }))
		}, ok, ErrDuplicate, `click of "b1"`},
		{"same impression, item, event and key", func(t *testing.T, st *Store) {
			mustAdd(t, st, with(func(e *Event) { e.Key = "k1" }))
		}, with(func(e *Event) { e.Key = "k1" }), ErrDuplicate, `key "k1"`},
		{"same key alone", func(t *testing.T, st *Store) {
			mustAdd(t, st, with(func(e *Event) { e.Key = "order-1" }))
		}, with(func(e *Event) { e.Item, e.Type, e.Key = "a2", "purchase", "order-1" }), ErrDuplicate, `key "order-1"`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			st, _ := openTest(t, testOptions(newClock(t0)))
			recordAll(t, st, im)
			if tc.setup != nil {
				tc.setup(t, st)
			}
			before := countEvents(t, st, im.ID)
			err := st.AddEvents(t.Context(), []Event{tc.ev})[0]
			if !errors.Is(err, tc.want) {
				t.Fatalf("AddEvents(%+v) = %v, want errors.Is %v", tc.ev, err, tc.want)
			}
			if !strings.Contains(err.Error(), tc.says) {
				t.Errorf("error %q does not say %q", err, tc.says)
			}
			if after := countEvents(t, st, im.ID); after != before {
				t.Errorf("rejected event changed the stored events from %d to %d", before, after)
			}
		})
	}
}

func mustAdd(t *testing.T, st *Store, evs ...Event) {
	t.Helper()
	for i, err := range st.AddEvents(t.Context(), evs) {
		if err != nil {
			t.Fatalf("AddEvents event %d (%+v): %v", i, evs[i], err)
		}
	}
}

func TestAddEventsAccepts(t *testing.T) {
	c := newClock(t0.Add(5 * time.Minute))
	st, _ := openTest(t, testOptions(c))
	im := teamDraftImpression(t0, 1, 0)
	recordAll(t, st, im)
	evs := []Event{
		{Impression: im.ID, Item: "a1", Type: "click", Time: t0},                          // at the impression: not early
		{Impression: im.ID, Item: "a1", Type: "purchase", Time: t0.Add(30 * time.Minute)}, // at the window's end: not late
		{Impression: im.ID, Item: "a1", Type: "click", Key: "k1", Time: t0.Add(time.Minute)},
		{Impression: im.ID, Item: "a1", Type: "click", Key: "k2", Time: t0.Add(time.Minute)}, // another key: another event
		{Impression: im.ID, Item: "b2", Type: "click"},                                       // no time: the store's clock
	}
	mustAdd(t, st, evs...)
	if got := countEvents(t, st, im.ID); got != len(evs) {
		t.Errorf("%d events stored, want %d", got, len(evs))
	}
	if evs[4].Time != (time.Time{}) {
		t.Error("AddEvents wrote into the caller's slice")
	}
}

func TestEventForQueuedImpression(t *testing.T) {
	o := testOptions(newClock(t0))
	o.Interval, o.Batch = time.Hour, 1<<20 // the impression stays queued
	st, _ := openTest(t, o)
	im := teamDraftImpression(t0, 1, 0)
	if !st.Record(im) {
		t.Fatal("Record = false")
	}
	if _, ok := readRecord(t, st, im.ID); ok {
		t.Fatal("impression committed before any event; the test needs it queued")
	}
	mustAdd(t, st, Event{Impression: im.ID, Item: "b1", Type: "click", Time: t0.Add(time.Second)})
	if _, ok := readRecord(t, st, im.ID); !ok {
		t.Error("impression not committed with its event")
	}
}

func TestReplayIsIdempotent(t *testing.T) {
	c := newClock(t0)
	st, _ := openTest(t, testOptions(c))
	a, b := teamDraftImpression(t0, 1, 11), teamDraftImpression(t0, 2, 12)
	recordAll(t, st, a, b)
	batch := []Event{
		{Impression: a.ID, Item: "b1", Type: "click", Time: t0.Add(time.Minute)},
		{Impression: a.ID, Item: "b1", Type: "purchase", Time: t0.Add(2 * time.Minute), Key: "order-9"},
		{Impression: b.ID, Item: "a1", Type: "click"},
	}
	mustAdd(t, st, batch...)
	for i, err := range st.AddEvents(t.Context(), batch) {
		if !errors.Is(err, ErrDuplicate) {
			t.Errorf("replayed event %d: %v, want ErrDuplicate", i, err)
		}
	}
	if _, err := st.Finalize(context.Background(), t0.Add(time.Hour)); err != nil {
		t.Fatal(err)
	}
	agg, err := st.Aggregate(context.Background(), "spring-refresh")
	if err != nil {
		t.Fatal(err)
	}
	// a: challenger's b1 clicked (1) and bought (3) -> challenger win;
	// b: incumbent's a1 clicked -> incumbent win (team-draft credit,
	// Radlinski, Kurup & Joachims 2008). The replay adds nothing.
	if want := [4]int64{0, 1, 1, 0}; agg.Outcomes != want {
		t.Errorf("outcomes after replay = %v, want %v", agg.Outcomes, want)
	}
	if got, _ := readRecord(t, st, a.ID); got.Score.Challenger != 4 {
		t.Errorf("challenger score of a = %v, want 4 (click 1 + purchase 3, counted once)", got.Score.Challenger)
	}
}

func TestSetRules(t *testing.T) {
	st, _ := openTest(t, testOptions(newClock(t0)))
	im := teamDraftImpression(t0, 1, 0)
	recordAll(t, st, im)
	ev := Event{Impression: im.ID, Item: "a1", Type: "wishlist", Time: t0.Add(time.Minute)}
	if err := st.AddEvents(t.Context(), []Event{ev})[0]; !errors.Is(err, ErrUnknownEvent) {
		t.Fatalf("before reload: %v, want ErrUnknownEvent", err)
	}
	if err := st.SetRules(Rules{Events: map[string]float64{"wishlist": 0.5}, Window: time.Minute}); err != nil {
		t.Fatal(err)
	}
	mustAdd(t, st, ev)
	late := Event{Impression: im.ID, Item: "a2", Type: "wishlist", Time: t0.Add(2 * time.Minute)}
	if err := st.AddEvents(t.Context(), []Event{late})[0]; !errors.Is(err, ErrTooLate) {
		t.Errorf("after shrinking the window to 1m, an event at +2m: %v, want ErrTooLate", err)
	}
	if err := st.SetRules(Rules{Window: -time.Second}); err == nil {
		t.Error("SetRules with a negative window succeeded")
	}
	if got := st.Rules().Window; got != time.Minute {
		t.Errorf("a rejected SetRules changed the window to %v", got)
	}
}

func TestAddEventsAfterClose(t *testing.T) {
	st, err := Open(t.TempDir()+"/riffle.db", testOptions(newClock(t0)))
	if err != nil {
		t.Fatal(err)
	}
	st.Close()
	errs := st.AddEvents(t.Context(), []Event{{Item: "a", Type: "click"}})
	if !errors.Is(errs[0], ErrClosed) {
		t.Errorf("AddEvents after Close = %v, want ErrClosed", errs[0])
	}
	if err := st.Flush(t.Context()); !errors.Is(err, ErrClosed) {
		t.Errorf("Flush after Close = %v, want ErrClosed", err)
	}
}

// TestEventsRightAfterRecord has four goroutines each record 20
// impressions and at once send events on ten of them, many times: every
// event must find its impression, whichever request the writer took first.
// (It caught the writer draining the queue before collecting the other
// waiting requests.)
func TestEventsRightAfterRecord(t *testing.T) {
	st, _ := openTest(t, &Options{Batch: 256, Interval: 5 * time.Millisecond, FinalizeEvery: -1})
	var wg sync.WaitGroup
	var failed atomic.Int64
	for range 4 {
		wg.Go(func() {
			for range 150 {
				var evs []Event
				for i := range 20 {
					im := tenSlots(time.Now())
					if st.Record(im) && i < 10 {
						evs = append(evs, Event{Impression: im.ID, Item: "sku-00003", Type: "click"})
					}
				}
				for _, err := range st.AddEvents(t.Context(), evs) {
					if err != nil && failed.Add(1) == 1 {
						t.Errorf("event right after its Record: %v", err)
					}
				}
			}
		})
	}
	wg.Wait()
	if n := failed.Load(); n > 0 {
		t.Errorf("%d of 6000 events refused", n)
	}
}

// TestAddEventsCancelled sends events with a context already cancelled:
// the writer may or may not take each request first, so each answer is nil
// (recorded), the context's error before the request was handed over (not
// recorded), or the context's error after ("outcome unknown"). A replay
// with a live context must then agree with every answer: an acknowledged
// event is a duplicate, one refused before hand-over is new, and in the
// end each of the 50 events is stored exactly once.
func TestAddEventsCancelled(t *testing.T) {
	st, _ := openTest(t, testOptions(newClock(t0)))
	im := teamDraftImpression(t0, 1, 0)
	recordAll(t, st, im)
	const n = 50
	evs := make([]Event, n)
	first := make([]error, n)
	for i := range evs {
		ctx, cancel := context.WithCancel(t.Context())
		cancel()
		evs[i] = Event{Impression: im.ID, Item: "a1", Type: "click", Key: fmt.Sprintf("k%02d", i), Time: t0.Add(time.Second)}
		first[i] = st.AddEvents(ctx, evs[i:i+1])[0]
		if first[i] != nil && !errors.Is(first[i], context.Canceled) {
			t.Fatalf("event %d with a cancelled context: %v, want nil or context.Canceled", i, first[i])
		}
	}
	if err := st.Flush(t.Context()); err != nil {
		t.Fatal(err)
	}
	for i, err := range st.AddEvents(t.Context(), evs) {
		unknown := first[i] != nil && strings.Contains(first[i].Error(), "outcome unknown")
		switch {
		case first[i] == nil && !errors.Is(err, ErrDuplicate):
			t.Errorf("event %d was acknowledged, but its replay gave %v, want ErrDuplicate", i, err)
		case first[i] != nil && !unknown && err != nil:
			t.Errorf("event %d was refused before hand-over (%v), but its replay gave %v, want nil", i, first[i], err)
		case unknown && err != nil && !errors.Is(err, ErrDuplicate):
			t.Errorf("event %d: replay after an unknown outcome gave %v, want nil or ErrDuplicate", i, err)
		}
	}
	if got := countEvents(t, st, im.ID); got != n {
		t.Errorf("%d events stored after the replay, want each of the %d once", got, n)
	}
}

package storetest

import (
	"strings"
	"testing"
	"time"

	"riffle/store"
)

// testWindows checks each reason an event is refused, in the order the
// contract gives, against one impression served at T0 with the default
// 30-minute window.
func testWindows(t *testing.T, open Opener) {
	f := newFixture(t, open, store.Rules{}, 0)
	im := TeamDraft(T0, 1, 7)
	f.record(im)
	f.clk.Set(T0.Add(time.Minute))
	on := func(item, typ string, at time.Duration) store.Event {
		return store.Event{Impression: im.ID, Item: item, Type: typ, Time: T0.Add(at)}
	}
	cases := []struct {
		name string
		ev   store.Event
		want error
	}{
		{"inside the window", on("b1", "click", time.Minute), nil},
		{"at the window's last instant", on("b1", "purchase", 30*time.Minute), nil},
		{"at the impression's own instant", on("b2", "click", 0), nil},
		{"key at the length limit", store.Event{Impression: im.ID, Item: "a1", Type: "purchase", Time: T0, Key: strings.Repeat("k", store.MaxKeyLen)}, nil},
		{"before the impression", on("a1", "click", -time.Second), store.ErrTooEarly},
		{"after the window", on("a1", "click", 30*time.Minute+time.Nanosecond), store.ErrTooLate},
		{"unknown impression", store.Event{Impression: ID(T0.Add(-time.Hour), 99), Item: "a1", Type: "click", Time: T0}, store.ErrUnknownImpression},
		{"item not shown", on("zz", "click", time.Minute), store.ErrItemNotShown},
		{"event type without a weight", on("a1", "hover", time.Minute), store.ErrUnknownEvent},
		{"no item", on("", "click", time.Minute), store.ErrBadEvent},
		{"key too long", store.Event{Impression: im.ID, Item: "a1", Type: "click", Time: T0, Key: strings.Repeat("k", store.MaxKeyLen+1)}, store.ErrBadEvent},
	}
	for _, tc := range cases {
		if err := f.add(tc.ev); !is(err, tc.want) {
			t.Errorf("%s: AddEvents = %v, want %v", tc.name, err, tc.want)
		}
	}
	f.finalize(T0.Add(30*time.Minute), 1)
	if err := f.add(on("a2", "click", 10*time.Minute)); !is(err, store.ErrTooLate) {
		t.Errorf("event inside the window on a final impression: %v, want ErrTooLate", err)
	}
}

// testIdempotency replays keyed and unkeyed events in order: a key makes
// an event a duplicate of any earlier one with that key; without a key an
// event is a duplicate of an earlier unkeyed one with the same item and
// type, so an unkeyed event after a keyed one is not a duplicate.
func testIdempotency(t *testing.T, open Opener) {
	f := newFixture(t, open, store.Rules{}, 0)
	im, other := TeamDraft(T0, 1, 7), TeamDraft(T0, 2, 8)
	f.record(im, other)
	click := func(imp *store.Impression, item, typ, key string) store.Event {
		return store.Event{Impression: imp.ID, Item: item, Type: typ, Time: T0.Add(time.Second), Key: key}
	}
	steps := []struct {
		name string
		ev   store.Event
		want error
	}{
		{"keyed", click(im, "a1", "click", "k1"), nil},
		{"same key again", click(im, "a1", "click", "k1"), store.ErrDuplicate},
		{"unkeyed after keyed", click(im, "a1", "click", ""), nil},
		{"unkeyed again", click(im, "a1", "click", ""), store.ErrDuplicate},
		{"another key, same item", click(im, "a1", "click", "k2"), nil},
		{"known key, other fields", click(im, "b1", "purchase", "k1"), store.ErrDuplicate},
		{"known key on another impression", click(other, "b1", "click", "k2"), store.ErrDuplicate},
		{"unkeyed on another impression", click(other, "a1", "click", ""), nil},
	}
	for _, s := range steps {
		if err := f.add(s.ev); !is(err, s.want) {
			t.Errorf("%s: AddEvents = %v, want %v", s.name, err, s.want)
		}
	}
	// Two events with one new key in one call: the second is a duplicate.
	errs := f.st.AddEvents(t.Context(), []store.Event{click(other, "b2", "click", "k3"), click(other, "b2", "click", "k3")})
	if len(errs) != 2 || errs[0] != nil || !is(errs[1], store.ErrDuplicate) {
		t.Errorf("one key twice in one call: %v, want [nil ErrDuplicate]", errs)
	}
	// im holds three recorded clicks on a1 (incumbent), other one on a1
	// and one on b2 (challenger): an incumbent win and a tie.
	f.finalize(T0.Add(time.Hour), 2)
	if got, want := f.aggregate().Outcomes, outcomes(0, 1, 0, 1); got != want {
		t.Errorf("outcomes %v, want %v (duplicates must not count)", got, want)
	}
}

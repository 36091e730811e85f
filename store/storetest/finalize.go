package storetest

import (
	"sync"
	"testing"
	"time"

	"riffle/merge"
	"riffle/store"
)

// testFinalisation checks outcomes on hand-worked team-draft cases
// (Radlinski, Kurup & Joachims 2008: a click credits the team that
// picked the slot), with the event weights and debiasing of the rules.
func testFinalisation(t *testing.T, open Opener) {
	type ev struct{ item, typ string }
	withView := store.Rules{Events: map[string]float64{"view": 0, "click": 1}}
	cases := []struct {
		name     string
		rules    store.Rules
		fallback string
		events   []ev
		want     [4]int64
	}{
		{"no feedback", store.Rules{}, "", nil, outcomes(1, 0, 0, 0)},
		{"click on the challenger's pick", store.Rules{}, "", []ev{{"b1", "click"}}, outcomes(0, 0, 1, 0)},
		{"click on an item both lists hold", store.Rules{}, "", []ev{{"a1", "click"}}, outcomes(0, 1, 0, 0)},
		{"one click each", store.Rules{}, "", []ev{{"a1", "click"}, {"b1", "click"}}, outcomes(0, 0, 0, 1)},
		{"purchase outweighs click", store.Rules{}, "", []ev{{"a1", "click"}, {"b2", "purchase"}}, outcomes(0, 0, 1, 0)},
		// A zero-weight event is feedback but no click: a tie, not a win.
		{"zero-weight event", withView, "", []ev{{"b1", "view"}}, outcomes(0, 0, 0, 1)},
		{"zero-weight beside a click", withView, "", []ev{{"b1", "view"}, {"a1", "click"}}, outcomes(0, 1, 0, 0)},
		// Debiasing weighs a2 at slot 3 by 3^eta and b1 at slot 2 by 2^eta
		// (Joachims, Swaminathan & Schnabel 2017's propensity form).
		{"eta 1", store.Rules{Eta: 1}, "", []ev{{"a2", "click"}, {"b1", "click"}}, outcomes(0, 1, 0, 0)},
		{"incumbent only: no outcome", store.Rules{}, "ramp", []ev{{"a1", "click"}}, outcomes(0, 0, 0, 0)},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			f := newFixture(t, open, tc.rules, 0)
			im := TeamDraft(T0, 1, 7)
			if tc.fallback != "" {
				im.Policy, im.Fallback = "", tc.fallback
			}
			f.record(im)
			for i, e := range tc.events {
				f.mustAdd(store.Event{Impression: im.ID, Item: e.item, Type: e.typ, Time: T0.Add(time.Duration(i+1) * time.Second)})
			}
			f.finalize(T0.Add(30*time.Minute-time.Nanosecond), 0)
			f.finalize(T0.Add(30*time.Minute), 1)
			a := f.aggregate()
			if a.Outcomes != tc.want {
				t.Errorf("outcomes %v, want %v", a.Outcomes, tc.want)
			}
			interleaved := int64(1)
			if tc.fallback != "" {
				interleaved = 0
			}
			if a.Impressions != 1 || a.Interleaved != interleaved {
				t.Errorf("impressions %d, interleaved %d; want 1, %d", a.Impressions, a.Interleaved, interleaved)
			}
		})
	}
}

// Balanced is a balanced interleaving (Joachims 2002) at time at of
// A = [a1 a2 a3] and B = [b1 a1 b2]: a1 (ranks 1 in A, 2 in B), b1 (-, 1),
// a2 (2, -), b2 (-, 3), a3 (3, -).
func Balanced(at time.Time, tag, user uint64) *store.Impression {
	im := TeamDraft(at, tag, user)
	im.Policy = "balanced"
	im.Slots = []merge.Slot{
		{Item: "a1", Team: merge.Incumbent, RankA: 1, RankB: 2},
		{Item: "b1", Team: merge.Challenger, RankB: 1},
		{Item: "a2", Team: merge.Incumbent, RankA: 2},
		{Item: "b2", Team: merge.Challenger, RankB: 3},
		{Item: "a3", Team: merge.Incumbent, RankA: 3},
	}
	return im
}

// testFinaliseBalanced checks that the store gives balanced's credit only
// the events that weigh something. Balanced (in the form of Chapelle,
// Joachims, Radlinski & Yue, ACM TOIS 2012, section 2): k is the better
// rank of the lowest clicked item, and each side earns the clicks on
// items it ranks within its top k.
func testFinaliseBalanced(t *testing.T, open Opener) {
	withView := store.Rules{Events: map[string]float64{"view": 0, "click": 1}}
	cases := []struct {
		name   string
		events [][2]string
		want   [4]int64
	}{
		// A click on a1 alone: k = 1; only A ranks a1 within 1.
		{"top click alone", [][2]string{{"a1", "click"}}, outcomes(0, 1, 0, 0)},
		// Clicks on a1 and b2 (B's rank 3): k = 3, so a1 credits both
		// sides and b2 the challenger: 1 to 2.
		{"lowest click sets k", [][2]string{{"a1", "click"}, {"b2", "click"}}, outcomes(0, 0, 1, 0)},
		// A view (weight 0) of b2 is no click and cannot set k: k stays 1
		// and the incumbent wins 1 to 0 (were it a click, k = 3: a tie).
		{"zero-weight event does not set k", [][2]string{{"a1", "click"}, {"b2", "view"}}, outcomes(0, 1, 0, 0)},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			f := newFixture(t, open, withView, 0)
			im := Balanced(T0, 1, 7)
			f.record(im)
			for i, e := range tc.events {
				f.mustAdd(store.Event{Impression: im.ID, Item: e[0], Type: e[1], Time: T0.Add(time.Duration(i+1) * time.Second)})
			}
			f.finalize(T0.Add(30*time.Minute), 1)
			if got := f.aggregate().Outcomes; got != tc.want {
				t.Errorf("outcomes %v, want %v", got, tc.want)
			}
		})
	}
}

// testFinaliseOnce checks that every impression gets exactly one outcome
// however often, and however concurrently, Finalize runs.
func testFinaliseOnce(t *testing.T, open Opener) {
	f := newFixture(t, open, store.Rules{}, 0)
	const n = 600 // more than one finalisation chunk
	ims := make([]*store.Impression, n)
	for i := range ims {
		ims[i] = TeamDraft(T0.Add(time.Duration(i)*time.Millisecond), uint64(i), uint64(i%40+1))
	}
	f.record(ims...)
	for i := 0; i < n; i += 3 {
		f.mustAdd(store.Event{Impression: ims[i].ID, Item: "b1", Type: "click", Time: ims[i].Time.Add(time.Second)})
	}
	var wg sync.WaitGroup
	counts := make([]int, 4)
	for w := range counts {
		wg.Add(1)
		go func() {
			defer wg.Done()
			got, err := f.st.Finalize(ctx(), T0.Add(time.Hour))
			if err != nil {
				t.Errorf("concurrent Finalize: %v", err)
			}
			counts[w] = got
		}()
	}
	wg.Wait()
	total := 0
	for _, c := range counts {
		total += c
	}
	if total != n {
		t.Errorf("concurrent Finalize passes finalised %v impressions in all, want %d", counts, n)
	}
	f.finalize(T0.Add(2*time.Hour), 0)
	if got, want := f.aggregate().Outcomes, outcomes(n-n/3, 0, n/3, 0); got != want {
		t.Errorf("outcomes %v, want %v", got, want)
	}
}

// testUserSums checks the per-user outcome counts behind the clustered
// variance: impressions without a user key count in the totals only.
func testUserSums(t *testing.T, open Opener) {
	f := newFixture(t, open, store.Rules{}, 0)
	type imp struct {
		user  uint64
		items []string
	}
	plan := []imp{{7, []string{"b1"}}, {7, []string{"a1"}}, {9, []string{"a1", "b1"}}, {0, []string{"b2"}}, {9, nil}}
	for i, p := range plan {
		im := TeamDraft(T0.Add(time.Duration(i)*time.Second), uint64(i), p.user)
		f.record(im)
		for _, item := range p.items {
			f.mustAdd(store.Event{Impression: im.ID, Item: item, Type: "click", Time: im.Time.Add(time.Second)})
		}
	}
	f.finalize(T0.Add(time.Hour), len(plan))
	a := f.aggregate()
	want := map[uint64][4]int64{7: outcomes(0, 1, 1, 0), 9: outcomes(1, 0, 0, 1)}
	if len(a.Users) != len(want) || a.Users[7] != want[7] || a.Users[9] != want[9] {
		t.Errorf("users %v, want %v", a.Users, want)
	}
	if a.Outcomes != outcomes(1, 1, 2, 1) {
		t.Errorf("outcomes %v, want %v", a.Outcomes, outcomes(1, 1, 2, 1))
	}
	if a.Policy != "team-draft" || !a.Start.Equal(T0) {
		t.Errorf("policy %q, start %v; want team-draft, %v", a.Policy, a.Start, T0)
	}
}

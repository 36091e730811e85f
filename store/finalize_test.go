package store

import (
	"context"
	"errors"
	"math"
	"testing"
	"time"

	"riffle/merge"
)

// TestDebiasWeight checks the weights the store applies (merge's).
func TestDebiasWeight(t *testing.T) {
	// 1/p(rank) with p(rank) = (1/rank)^eta, the propensity form of
	// Joachims, Swaminathan & Schnabel (WSDM 2017), worked by hand:
	// eta = 1 gives rank, eta = 2 gives rank squared.
	tests := []struct {
		eta  float64
		want [5]float64
	}{
		{0, [5]float64{1, 1, 1, 1, 1}},
		{1, [5]float64{1, 2, 3, 4, 5}},
		{2, [5]float64{1, 4, 9, 16, 25}},
	}
	for _, tc := range tests {
		for rank := 1; rank <= 5; rank++ {
			if got := merge.DebiasWeight(rank, tc.eta); math.Abs(got-tc.want[rank-1]) > 1e-12 {
				t.Errorf("DebiasWeight(rank %d, eta %v) = %v, want %v", rank, tc.eta, got, tc.want[rank-1])
			}
		}
	}
}

// balancedImpression is a balanced interleaving (Joachims 2002) of
// A = [a1 a2 a3] and B = [b1 a1 b2]: a1 (1, 2), b1 (-, 1), a2 (2, -),
// b2 (-, 3), a3 (3, -).
func balancedImpression(t time.Time, tag uint64) *Impression {
	im := teamDraftImpression(t, tag, 0)
	im.Policy = "balanced"
	im.Slots = []merge.Slot{
		{Item: "a1", Team: merge.Incumbent, RankA: 1, RankB: 2},
		{Item: "b1", Team: merge.Challenger, RankA: 0, RankB: 1},
		{Item: "a2", Team: merge.Incumbent, RankA: 2, RankB: 0},
		{Item: "b2", Team: merge.Challenger, RankA: 0, RankB: 3},
		{Item: "a3", Team: merge.Incumbent, RankA: 3, RankB: 0},
	}
	return im
}

// TestFinalizeOutcomes checks the store's weighting and its use of each
// policy's credit on hand-worked cases.
func TestFinalizeOutcomes(t *testing.T) {
	type ev struct{ item, typ string }
	tests := []struct {
		name   string
		im     func(time.Time, uint64) *Impression
		rules  Rules
		events []ev
		want   merge.Outcome
		score  merge.Score
	}{
		{"no feedback", tdImp, Rules{}, nil, merge.NoFeedback, merge.Score{}},
		// Team-draft (Radlinski, Kurup & Joachims 2008): a click credits the
		// team that picked the slot, even for a1 which B also holds.
		{"click on challenger's pick", tdImp, Rules{}, []ev{{"b1", "click"}}, merge.ChallengerWin, merge.Score{Challenger: 1}},
		{"click on item both hold", tdImp, Rules{}, []ev{{"a1", "click"}}, merge.IncumbentWin, merge.Score{Incumbent: 1}},
		{"one click each", tdImp, Rules{}, []ev{{"a1", "click"}, {"b1", "click"}}, merge.Tie, merge.Score{Incumbent: 1, Challenger: 1}},
		{"purchase outweighs click", tdImp, Rules{}, []ev{{"a1", "click"}, {"b2", "purchase"}}, merge.ChallengerWin, merge.Score{Incumbent: 1, Challenger: 3}},
		{"zero-weight event: feedback, no credit", tdImp, Rules{Events: map[string]float64{"view": 0, "click": 1}},
			[]ev{{"b1", "view"}}, merge.Tie, merge.Score{}},
		// Debiasing weighs a2 at slot 3 by 3^eta and b1 at slot 2 by 2^eta.
		{"eta 1", tdImp, Rules{Eta: 1}, []ev{{"a2", "click"}, {"b1", "click"}}, merge.IncumbentWin, merge.Score{Incumbent: 3, Challenger: 2}},
		{"eta 2", tdImp, Rules{Eta: 2}, []ev{{"a2", "click"}, {"b1", "click"}}, merge.IncumbentWin, merge.Score{Incumbent: 9, Challenger: 4}},
		// Balanced (Joachims 2002, in the form of Chapelle, Joachims,
		// Radlinski & Yue, ACM TOIS 2012, section 2): k is the better rank,
		// in either list, of the lowest clicked item, and each side earns
		// the clicks on items it ranks within its top k.
		// A click on a1 alone: k = min(1, 2) = 1; A ranks a1 1, B ranks it 2.
		{"balanced, top click alone", balancedImpression, Rules{}, []ev{{"a1", "click"}}, merge.IncumbentWin, merge.Score{Incumbent: 1}},
		// Adding a click on b2 (slot 4, B's rank 3) makes it the lowest
		// click, so k = 3: a1 now credits both sides and b2 the challenger.
		{"balanced, lowest click sets k", balancedImpression, Rules{}, []ev{{"a1", "click"}, {"b2", "click"}}, merge.ChallengerWin, merge.Score{Incumbent: 1, Challenger: 2}},
		// A click on a2 (slot 3, A's rank 2, not in B): k = 2.
		{"balanced, k = 2 credits A", balancedImpression, Rules{}, []ev{{"a2", "click"}}, merge.IncumbentWin, merge.Score{Incumbent: 1}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			o := testOptions(newClock(t0))
			o.Rules = tc.rules
			st, _ := openTest(t, o)
			im := tc.im(t0, 1)
			recordAll(t, st, im)
			for i, e := range tc.events {
				mustAdd(t, st, Event{Impression: im.ID, Item: e.item, Type: e.typ, Time: t0.Add(time.Duration(i+1) * time.Second)})
			}
			if n, err := st.Finalize(context.Background(), t0.Add(30*time.Minute-time.Nanosecond)); n != 0 || err != nil {
				t.Fatalf("Finalize before the window closed = %d, %v; want 0, nil", n, err)
			}
			if n, err := st.Finalize(context.Background(), t0.Add(30*time.Minute)); n != 1 || err != nil {
				t.Fatalf("Finalize when the window closed = %d, %v; want 1, nil", n, err)
			}
			got, _ := readRecord(t, st, im.ID)
			if !got.Final || got.Outcome != tc.want || got.Score != tc.score {
				t.Errorf("final %v, outcome %v, score %+v; want final, %v, %+v", got.Final, got.Outcome, got.Score, tc.want, tc.score)
			}
			agg, err := st.Aggregate(context.Background(), "spring-refresh")
			if err != nil {
				t.Fatal(err)
			}
			var want [4]int64
			want[tc.want] = 1
			if agg.Outcomes != want {
				t.Errorf("aggregate outcomes %v, want %v", agg.Outcomes, want)
			}
		})
	}
}

func tdImp(t time.Time, tag uint64) *Impression { return teamDraftImpression(t, tag, 0) }

func TestFinalizeSkipsIncumbentOnly(t *testing.T) {
	st, _ := openTest(t, testOptions(newClock(t0)))
	im := teamDraftImpression(t0, 1, 3)
	im.Policy, im.Fallback = "", "ramp"
	recordAll(t, st, im)
	mustAdd(t, st, Event{Impression: im.ID, Item: "a1", Type: "click", Time: t0.Add(time.Second)})
	if n, err := st.Finalize(context.Background(), t0.Add(time.Hour)); n != 1 || err != nil {
		t.Fatalf("Finalize = %d, %v", n, err)
	}
	agg, err := st.Aggregate(context.Background(), "spring-refresh")
	if err != nil {
		t.Fatal(err)
	}
	if agg.Impressions != 1 || agg.Interleaved != 0 || agg.Outcomes != [4]int64{} || len(agg.Users) != 0 {
		t.Errorf("incumbent-only impression: aggregate %+v; want 1 impression, nothing interleaved or counted", agg)
	}
}

func TestAggregateUsersAndRecent(t *testing.T) {
	st, _ := openTest(t, testOptions(newClock(t0)))
	u1, u2 := HashUser("shopper-1"), HashUser("shopper-2")
	var ims []*Impression
	// One impression a minute for 90 minutes, alternating users; every
	// third one without a user key.
	for i := range 90 {
		user := []uint64{u1, u2, 0}[i%3]
		ims = append(ims, teamDraftImpression(t0.Add(time.Duration(i)*time.Minute), uint64(i), user))
	}
	recordAll(t, st, ims...)
	for i, im := range ims {
		if i%2 == 0 { // even minutes: a click on the challenger's pick
			mustAdd(t, st, Event{Impression: im.ID, Item: "b1", Type: "click", Time: im.Time.Add(time.Second)})
		}
	}
	if _, err := st.Finalize(context.Background(), t0.Add(3*time.Hour)); err != nil {
		t.Fatal(err)
	}
	agg, err := st.Aggregate(context.Background(), "spring-refresh")
	if err != nil {
		t.Fatal(err)
	}
	if agg.Outcomes != [4]int64{45, 0, 45, 0} || agg.Impressions != 90 || agg.Interleaved != 90 {
		t.Errorf("totals %d/%d, outcomes %v; want 90/90, [45 0 45 0]", agg.Impressions, agg.Interleaved, agg.Outcomes)
	}
	// Users: i%3 == 0 is u1 (30 impressions, i even for 15), i%3 == 1 is u2.
	if got, want := agg.Users[u1], [4]int64{15, 0, 15, 0}; got != want {
		t.Errorf("user 1 counts %v, want %v", got, want)
	}
	if got, want := agg.Users[u2], [4]int64{15, 0, 15, 0}; got != want {
		t.Errorf("user 2 counts %v, want %v", got, want)
	}
	if len(agg.Users) != 2 {
		t.Errorf("%d users, want 2 (impressions without a key are not a user)", len(agg.Users))
	}
	// Recent: the 60 minutes up to the newest (minute 89) are 30..89; of
	// them the even ones, 30 in all, had feedback.
	if agg.RecentImpressions != 60 || agg.RecentWithFeedback != 30 || agg.RecentSpan != time.Hour {
		t.Errorf("recent %d / %d over %v, want 60 / 30 over 1h", agg.RecentImpressions, agg.RecentWithFeedback, agg.RecentSpan)
	}
	if !agg.Start.Equal(t0) || !agg.RecentEnd.Equal(t0.Add(89*time.Minute)) || agg.Policy != "team-draft" {
		t.Errorf("start %v, end %v, policy %q", agg.Start, agg.RecentEnd, agg.Policy)
	}
	names, err := st.Experiments(context.Background())
	if err != nil || len(names) != 1 || names[0] != "spring-refresh" {
		t.Errorf("Experiments() = %v, %v", names, err)
	}
}

// TestFinalizeSetsAsideUnknownPolicy checks that an impression whose
// policy this riffle does not know is set aside, uncounted, and does not
// stall the impressions after it.
func TestFinalizeSetsAsideUnknownPolicy(t *testing.T) {
	st, _ := openTest(t, testOptions(newClock(t0)))
	bad := teamDraftImpression(t0, 1, 0)
	bad.Policy = "no-such-policy"
	good := teamDraftImpression(t0.Add(time.Second), 2, 0)
	recordAll(t, st, bad, good)
	mustAdd(t, st, Event{Impression: good.ID, Item: "b2", Type: "click", Time: t0.Add(2 * time.Second)})
	n, err := st.Finalize(context.Background(), t0.Add(time.Hour))
	if err == nil || !errors.Is(err, merge.ErrUnknownPolicy) {
		t.Fatalf("Finalize error %v, want one naming the unknown policy", err)
	}
	if n != 1 {
		t.Errorf("finalised %d impressions, want 1 (the good one)", n)
	}
	if got, _ := readRecord(t, st, bad.ID); got.Final {
		t.Error("impression with an unknown policy was finalised")
	}
	if got, _ := readRecord(t, st, good.ID); !got.Final {
		t.Error("the impression after the bad one was not finalised")
	}
	if agg, _ := st.Aggregate(context.Background(), "spring-refresh"); agg.Outcomes != [4]int64{0, 0, 1, 0} {
		t.Errorf("outcomes %v, want only the good impression's challenger win", agg.Outcomes)
	}
	if n, err := st.Finalize(context.Background(), t0.Add(2*time.Hour)); n != 0 || err != nil {
		t.Errorf("second Finalize = %d, %v; want 0, nil (the bad one is set aside)", n, err)
	}
}

func TestBackgroundPassFinalisesAndRetains(t *testing.T) {
	c := newClock(t0)
	o := testOptions(c)
	o.FinalizeEvery, o.Retention = 5*time.Millisecond, 2*time.Hour
	st, _ := openTest(t, o)
	im := teamDraftImpression(t0, 1, 0)
	im.Time = time.Time{} // taken from the id
	recordAll(t, st, im)
	mustAdd(t, st, Event{Impression: im.ID, Item: "b2", Type: "click", Time: t0.Add(time.Second)})
	c.Set(t0.Add(31 * time.Minute))
	waitFor(t, "finalised", func() bool { r, _ := readRecord(t, st, im.ID); return r.Final })
	if agg, _ := st.Aggregate(context.Background(), "spring-refresh"); agg.Outcomes != [4]int64{0, 0, 1, 0} {
		t.Errorf("outcomes %v, want one challenger win", agg.Outcomes)
	}
	c.Set(t0.Add(3 * time.Hour))
	waitFor(t, "deleted by retention", func() bool { _, ok := readRecord(t, st, im.ID); return !ok })
}

func waitFor(t *testing.T, what string, cond func() bool) {
	t.Helper()
	for deadline := time.Now().Add(5 * time.Second); !cond(); time.Sleep(2 * time.Millisecond) {
		if time.Now().After(deadline) {
			t.Fatalf("not %s within 5s", what)
		}
	}
}

package counterfactual

import (
	"math/rand/v2"
	"slices"
	"testing"

	"riffle/merge"
	"riffle/merge/simulate"
)

// nudge returns A after one bubble-sort pass by grade: toward the ideal
// order when better, away from it otherwise. A retrained model that
// reorders what the live one shows, so the logged comparison covers it
// well (a candidate that reshuffles much more gets a small effective
// sample size, which the report flags).
func nudge(q *simulate.Query, better bool) []string {
	c := slices.Clone(q.A)
	for i := 0; i+1 < len(c); i++ {
		gi, gj := q.Grades[c[i]], q.Grades[c[i+1]]
		if (better && gj > gi) || (!better && gi > gj) {
			c[i], c[i+1] = c[i+1], c[i]
			i++
		}
	}
	return c
}

// impression draws one interleaving of a and b and a user's clicks on it.
func impression(a, b []string, q *simulate.Query, model simulate.ClickModel, r *rand.Rand) ([]merge.Slot, []merge.Click) {
	slots := merge.Probabilistic{}.Interleave(nil, a, b, len(a), r.Uint64())
	grades := make([]int, len(slots))
	for i, s := range slots {
		grades[i] = q.Grades[s.Item]
	}
	var clicks []merge.Click
	for _, p := range model.Clicks(nil, grades, r) {
		clicks = append(clicks, merge.Click{Pos: p, Weight: 1})
	}
	return slots, clicks
}

// liveDelta runs n live impressions of a probabilistic comparison of the
// queries' A lists with cand and returns riffle's Delta over those with
// clicks, outcomes drawn as the sidecar draws them.
func liveDelta(qs []simulate.Query, cand [][]string, model simulate.ClickModel, n int, r *rand.Rand) float64 {
	var p merge.Probabilistic
	var w, l, ties int
	for range n {
		k := r.IntN(len(qs))
		slots, clicks := impression(qs[k].A, cand[k], &qs[k], model, r)
		if len(clicks) == 0 {
			continue
		}
		switch p.Decide(p.Credit(slots, clicks), true, r.Uint64()) {
		case merge.ChallengerWin:
			w++
		case merge.IncumbentWin:
			l++
		default:
			ties++
		}
	}
	return (float64(w)+float64(ties)/2)/float64(w+l+ties) - 0.5
}

// replayed logs n live impressions of A against B and estimates A against
// cand from them.
func replayed(t *testing.T, qs []simulate.Query, cand [][]string, model simulate.ClickModel, n int, r *rand.Rand) Estimate {
	terms := make([]Term, 0, n)
	for range n {
		k := r.IntN(len(qs))
		q := &qs[k]
		slots, clicks := impression(q.A, q.B, q, model, r)
		term, err := Weigh(&Logged{Slots: slots, Lengths: [2]int{len(q.A), len(q.B)}, Clicks: clicks},
			merge.Incumbent, cand[k], 0)
		if err != nil {
			t.Fatal(err)
		}
		term.User = r.Uint64N(uint64(n/4)) + 1 // about four impressions per user
		terms = append(terms, term)
	}
	e, err := Combine(terms, 0.05)
	if err != nil {
		t.Fatal(err)
	}
	return e
}

// TestReplaySimulation logs live probabilistic comparisons of A against B
// under a navigational cascade user (merge/simulate), replays candidates C
// worse than A, equal to A and better than A, and checks the offline
// estimates against live runs of A against C: the signs agree in at least
// 90% of seeded runs for the unequal candidates, and the 95% intervals
// cover the live Delta (measured by one long live run) at about their
// nominal rate. The runs are seeded, so the test is deterministic.
func TestReplaySimulation(t *testing.T) {
	runs, n, truthN := 40, 20000, 200000
	if testing.Short() {
		runs, n, truthN = 20, 5000, 100000
	}
	model, err := simulate.NewClickModel("navigational", 0)
	if err != nil {
		t.Fatal(err)
	}
	r := rand.New(rand.NewPCG(7, 16))
	qs := simulate.Synthetic(r, 40, 5, 1, 1.2)
	scenarios := []struct {
		name string
		sign int // -1 worse than A, 0 A itself, +1 better
	}{{"worse", -1}, {"equal", 0}, {"better", 1}}
	for _, sc := range scenarios {
		cand := make([][]string, len(qs))
		for k := range qs {
			cand[k] = qs[k].A
			if sc.sign != 0 {
				cand[k] = nudge(&qs[k], sc.sign > 0)
			}
		}
		truth := 0.0 // A against itself: zero by symmetry
		if sc.sign != 0 {
			truth = liveDelta(qs, cand, model, truthN, r)
		}
		if sc.sign != 0 && (truth > 0) != (sc.sign > 0) {
			t.Fatalf("%s: the live Delta %.4f does not have the intended sign", sc.name, truth)
		}
		agree, covered, lowESS := 0, 0, 0
		for range runs {
			e := replayed(t, qs, cand, model, n, r)
			live := liveDelta(qs, cand, model, n, r)
			if !e.Trusted {
				lowESS++ // flagged as not to be trusted: the claims below are about the others
				continue
			}
			if (e.Delta > 0) == (live > 0) {
				agree++
			}
			if e.CI.Contains(truth) {
				covered++
			}
		}
		t.Logf("%s: live Delta %.4f; untrusted (ESS < %d) %d/%d; of the rest, the offline sign agrees with a live run of %d in %d and the 95%% interval covers the live Delta in %d",
			sc.name, truth, MinESS, lowESS, runs, n, agree, covered)
		trusted := runs - lowESS
		if 2*trusted < runs {
			t.Errorf("%s: %d/%d runs have an effective sample size below %d", sc.name, lowESS, runs, MinESS)
		}
		if sc.sign != 0 && float64(agree) < 0.9*float64(trusted) {
			t.Errorf("%s: signs agree in %d/%d trusted runs, want at least 90%%", sc.name, agree, trusted)
		}
		// Binomial(m, 0.95) falls below 0.8 m with probability under 1% for m >= 20.
		if float64(covered) < 0.8*float64(trusted) {
			t.Errorf("%s: the interval covers the live Delta in %d/%d trusted runs, want about 95%%", sc.name, covered, trusted)
		}
	}
}

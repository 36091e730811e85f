package simulate

import (
	"context"
	"math"
	"math/rand/v2"

	"riffle/merge"
	"riffle/merge/verdict"
)

// sim is one policy's simulation on one experiment's queries.
type sim struct {
	policy merge.Policy
	qs     []Query
	model  ClickModel
	slots  int
	mix    verdict.Mixture
	alpha  float64
}

// tally is what one simulation saw.
type tally struct {
	// outcomes counts impressions by merge.Outcome.
	outcomes [4]int
	// decidedAt is the 1-based impression after which the sequential test
	// first decided, 0 if it never did; dir is the side it decided for
	// (+1 challenger, -1 incumbent).
	decidedAt, dir int
	// credit and absCredit sum Challenger - Incumbent, and its absolute
	// value, over impressions with clicks.
	credit, absCredit float64
}

// delta is Chapelle et al.'s preference statistic (W + T/2)/n - 1/2 over
// the impressions with clicks; positive favours the challenger.
func (t *tally) delta() float64 {
	w, l, ties := t.outcomes[merge.ChallengerWin], t.outcomes[merge.IncumbentWin], t.outcomes[merge.Tie]
	n := w + l + ties
	if n == 0 {
		return 0
	}
	return (float64(w)+float64(ties)/2)/float64(n) - 0.5
}

// creditBalance is the summed credit difference over the summed absolute
// difference: in [-1, 1], positive favouring the challenger, and zero in
// expectation for a policy whose expected credit is zero.
func (t *tally) creditBalance() float64 {
	if t.absCredit == 0 {
		return 0
	}
	return t.credit / t.absCredit
}

// run simulates n impressions. The query and the interleaving seed of each
// impression come from one stream and the clicks from another, both split
// from r, so every policy sees the same queries and seeds in the same
// order whatever its users click.
func (s *sim) run(ctx context.Context, n int, r *rand.Rand) (tally, error) {
	pick := rand.New(rand.NewPCG(r.Uint64(), r.Uint64()))
	users := rand.New(rand.NewPCG(r.Uint64(), r.Uint64()))
	var (
		t      tally
		slots  []merge.Slot
		items  []string
		grades []int
		pos    []int
		clicks []merge.Click
	)
	for i := range n {
		if i%512 == 0 {
			if err := ctx.Err(); err != nil {
				return t, err
			}
		}
		q := &s.qs[pick.IntN(len(s.qs))]
		seed := pick.Uint64()
		slots = s.policy.Interleave(slots, q.A, q.B, s.slots, seed)
		items = items[:0]
		for _, sl := range slots {
			items = append(items, sl.Item)
		}
		grades = q.grades(grades, items)
		pos = s.model.Clicks(pos, grades, users)
		if len(pos) == 0 {
			t.outcomes[merge.NoFeedback]++
			continue
		}
		clicks = clicks[:0]
		for _, p := range pos {
			clicks = append(clicks, merge.Click{Pos: p, Weight: 1})
		}
		score := s.policy.Credit(slots, clicks)
		o := merge.DecideFor(s.policy, score, true, seed)
		t.outcomes[o]++
		d := score.Challenger - score.Incumbent
		t.credit += d
		t.absCredit += math.Abs(d)
		if t.decidedAt == 0 && (o == merge.ChallengerWin || o == merge.IncumbentWin) {
			s.check(&t, i+1)
		}
	}
	return t, nil
}

// check runs the sequential test on the counts so far and records the
// first decision.
func (s *sim) check(t *tally, at int) {
	w, l := t.outcomes[merge.ChallengerWin], t.outcomes[merge.IncumbentWin]
	p, err := s.mix.PValue(float64(w), float64(l))
	if err != nil || p >= s.alpha {
		return
	}
	t.decidedAt, t.dir = at, 1
	if l > w {
		t.dir = -1
	}
}

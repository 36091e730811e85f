package merge

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestProbabilisticDecideIsUnbiased checks, on balanced interleaving's
// adversarial pair A = (a,b,c), B = (b,c,a) with one uniformly random click
// (the setting of Hofmann, Whiteson & de Rijke, TOIS 2013), that wins minus
// losses counted by Probabilistic.Decide (a draw from the posterior over
// team assignments) average zero, while counting by the sign of the
// expected outcome alone leans to one side. Seeded Monte Carlo over 40,000
// impressions; the bound is 4 standard errors of a mean of values in
// [-1, 1] (sd <= 1), so a fair rule fails it about once in 16,000 runs.
func TestProbabilisticDecideIsUnbiased(t *testing.T) {
	a, b := []string{"a", "b", "c"}, []string{"b", "c", "a"}
	p := Probabilistic{Tau: 3}
	r := rand.New(rand.NewPCG(7, 11))
	const n = 40000
	var drawn, sign float64
	var slots []Slot
	for range n {
		seed := r.Uint64()
		slots = p.Interleave(slots, a, b, 3, seed)
		s := p.Credit(slots, []Click{{Pos: r.IntN(len(slots)), Weight: 1}})
		drawn += value(DecideFor(p, s, true, seed))
		sign += value(Decide(s, true))
	}
	bound := 4 / math.Sqrt(n)
	if m := drawn / n; math.Abs(m) > bound {
		t.Errorf("posterior-draw outcomes: mean wins-losses %.4f, want |.| <= %.4f", m, bound)
	}
	if m := sign / n; math.Abs(m) <= bound {
		t.Errorf("sign-of-E[o] outcomes: mean %.4f is within %.4f; the known lean should show, or this test cannot tell the rules apart", m, bound)
	}
}

func value(o Outcome) float64 {
	switch o {
	case ChallengerWin:
		return 1
	case IncumbentWin:
		return -1
	}
	return 0
}

func TestProbabilisticDecideFollowsScore(t *testing.T) {
	p := Probabilistic{}
	if got := p.Decide(Score{Challenger: 1}, false, 1); got != NoFeedback {
		t.Errorf("no events: %v, want none", got)
	}
	for seed := range uint64(50) {
		if got := p.Decide(Score{Challenger: 1}, true, seed); got != ChallengerWin {
			t.Fatalf("P(challenger)=1, seed %d: %v", seed, got)
		}
		if got := p.Decide(Score{Incumbent: 1}, true, seed); got != IncumbentWin {
			t.Fatalf("P(incumbent)=1, seed %d: %v", seed, got)
		}
		if got := p.Decide(Score{}, true, seed); got != Tie {
			t.Fatalf("P=0 both, seed %d: %v", seed, got)
		}
		if p.Decide(Score{Challenger: 0.5, Incumbent: 0.3}, true, seed) != p.Decide(Score{Challenger: 0.5, Incumbent: 0.3}, true, seed) {
			t.Fatalf("seed %d: two decisions differ", seed)
		}
	}
	if DecideFor(TeamDraft{}, Score{Challenger: 2, Incumbent: 1}, true, 9) != ChallengerWin {
		t.Error("DecideFor(TeamDraft) does not follow the tally")
	}
}

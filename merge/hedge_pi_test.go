package merge

import (
	"slices"
	"testing"
)

// TestPIAndOIUnderHedges runs the hedge checks of hedge_test.go on the
// probabilistic and optimized policies, and checks that with leading Fixed
// slots their credit is the credit of the list the policy produced.
func TestPIAndOIUnderHedges(t *testing.T) {
	o, _ := NewOptimized("", 0)
	hedges := []Hedge{{ChallengerFromSlot: 3}, {MaxChallengerSlots: 2}, {ChallengerFromSlot: 2, MaxChallengerSlots: 1}}
	for _, p := range []Policy{Probabilistic{}, o} {
		for _, lp := range listPairs() {
			for _, h := range hedges {
				for seed := range uint64(4) {
					got := Interleave(p, nil, lp.a, lp.b, 10, seed, h)
					checkHedged(t, p, got, lp.a, lp.b, 10, seed, h)
				}
			}
			lead := min(2, len(lp.a))
			got := Interleave(p, nil, lp.a, lp.b, 10, 7, Hedge{ChallengerFromSlot: lead + 1})
			rest := func(l []string) []string {
				return slices.DeleteFunc(slices.Clone(l), func(s string) bool { return slices.Contains(lp.a[:lead], s) })
			}
			mid := p.Interleave(nil, rest(lp.a), rest(lp.b), 10-lead, 7)
			for pos := range mid {
				want := p.Credit(mid, []Click{{Pos: pos, Weight: 1}})
				clicks := []Click{{Pos: pos + lead, Weight: 1}}
				if lead > 0 {
					clicks = append(clicks, Click{Pos: 0, Weight: 1}) // on a Fixed slot: nothing
				}
				if g := p.Credit(got, clicks); g != want {
					t.Fatalf("%s %s slot %d: hedged credit %+v, want the policy's %+v", p.Name(), lp.name, pos, g, want)
				}
			}
		}
	}
}

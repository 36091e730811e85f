package merge

import (
	"fmt"
	"math/rand/v2"
	"testing"
)

// TestHedgedLength checks, for every registered policy with and without a
// cap and a first slot, that a hedged list never loses a slot: it holds
// min(n, |a ∪ b|) distinct items whenever the incumbent alone could fill
// every slot a hedge takes away from the challenger, and never fewer than
// min(n, |a|). The first case is the one seen live: deploy/riffle.yaml's
// hedge (cap 4, first slot 2), incumbent 000-009 and challenger 003-012
// gave 9 items of 10 on about half the seeds.
func TestHedgedLength(t *testing.T) {
	hedges := []Hedge{{}, {MaxChallengerSlots: 4, ChallengerFromSlot: 2}, {MaxChallengerSlots: 1},
		{MaxChallengerSlots: 3}, {ChallengerFromSlot: 3}, {MaxChallengerSlots: 2, ChallengerFromSlot: 4}}
	r := rand.New(rand.NewPCG(12, 1))
	cases := []struct{ a, b []string }{{items(0, 10), items(3, 10)}}
	for range 300 {
		cases = append(cases, randomOverlap(r))
	}
	for _, name := range Names() {
		p, err := New(name, Options{})
		if err != nil {
			t.Fatal(err)
		}
		for ci, c := range cases {
			for _, h := range hedges {
				for _, n := range []int{1, 5, 10, 16} {
					for seed := range uint64(4) {
						got := Interleave(p, nil, c.a, c.b, n, seed, h)
						checkLength(t, fmt.Sprintf("%s case %d hedge %+v n=%d seed=%d", name, ci, h, n, seed),
							got, c.a, c.b, n)
					}
				}
			}
		}
	}
}

// TestHedgedLengthDeployExample counts, over 200 seeds, the lists of the
// case seen live (team-draft, cap 4 from slot 2, incumbent 000-009,
// challenger 003-012) that come out shorter than 10; before the fix 101 did.
func TestHedgedLengthDeployExample(t *testing.T) {
	a, b := items(0, 10), items(3, 10)
	h := Hedge{MaxChallengerSlots: 4, ChallengerFromSlot: 2}
	short := 0
	for seed := range uint64(200) {
		if got := Interleave(TeamDraft{}, nil, a, b, 10, seed, h); len(got) != 10 {
			short++
		}
	}
	if short != 0 {
		t.Fatalf("%d of 200 seeds gave fewer than 10 items", short)
	}
}

// checkLength fails t when got repeats an item or is shorter than the
// lists allow.
func checkLength(t *testing.T, ctx string, got []Slot, a, b []string, n int) {
	t.Helper()
	seen := map[string]bool{}
	for _, s := range got {
		if seen[s.Item] {
			t.Fatalf("%s: %q twice in %s", ctx, s.Item, names(got))
		}
		seen[s.Item] = true
	}
	na, nu := union(a, nil), union(a, b)
	want := min(n, nu)
	if na >= want && len(got) != want {
		t.Fatalf("%s: %d items, want %d (|a|=%d |a ∪ b|=%d): %s", ctx, len(got), want, na, nu, names(got))
	}
	if len(got) < min(n, na) {
		t.Fatalf("%s: %d items, fewer than the incumbent's %d", ctx, len(got), min(n, na))
	}
}

// randomOverlap draws two lists of up to 14 distinct items each from a
// pool small enough that they usually share some.
func randomOverlap(r *rand.Rand) struct{ a, b []string } {
	pool := items(0, 2+r.IntN(24))
	pick := func() []string {
		k := r.IntN(min(len(pool), 14) + 1)
		perm := r.Perm(len(pool))[:k]
		out := make([]string, k)
		for i, j := range perm {
			out[i] = pool[j]
		}
		return out
	}
	return struct{ a, b []string }{pick(), pick()}
}

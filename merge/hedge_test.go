package merge

import (
	"math/rand/v2"
	"slices"
	"strings"
	"testing"
)

// policies are the policies this file's hedge tests run over.
var testPolicies = []Policy{TeamDraft{}, Balanced{}}

// TestInterleaveZeroHedge checks that a zero Hedge is the plain policy.
func TestInterleaveZeroHedge(t *testing.T) {
	for _, p := range testPolicies {
		for _, lp := range listPairs() {
			for seed := range uint64(5) {
				want := p.Interleave(nil, lp.a, lp.b, 10, seed)
				if got := Interleave(p, nil, lp.a, lp.b, 10, seed, Hedge{}); !slices.Equal(got, want) {
					t.Fatalf("%s %s seed %d: %v, want %v", p.Name(), lp.name, seed, got, want)
				}
			}
		}
	}
}

// TestInterleaveHedges checks the hedges against their definition: the
// first From-1 slots are the incumbent's top items marked Fixed; the rest
// is the policy's interleaving of the remaining items, in which challenger
// slots past the cap are replaced by unused incumbent items (Fixed), or
// dropped when the incumbent has none left.
func TestInterleaveHedges(t *testing.T) {
	hedges := []Hedge{{0, 3}, {0, 12}, {1, 0}, {2, 0}, {1, 2}, {3, 4}}
	for _, p := range testPolicies {
		for _, lp := range listPairs() {
			for _, h := range hedges {
				for seed := range uint64(8) {
					for _, n := range []int{0, 2, 10, 30} {
						got := Interleave(p, nil, lp.a, lp.b, n, seed, h)
						checkHedged(t, p, got, lp.a, lp.b, n, seed, h)
					}
				}
			}
		}
	}
}

// checkHedged rebuilds a hedged list from its definition and compares.
func checkHedged(t *testing.T, p Policy, got []Slot, a, b []string, n int, seed uint64, h Hedge) {
	t.Helper()
	ctx := func() string { return p.Name() + " " + names(got) }
	f := max(0, min(n, h.ChallengerFromSlot-1, len(a)))
	want := []Slot{}
	shown := map[string]bool{}
	for _, s := range a[:f] {
		want = append(want, Slot{Item: s, Team: Fixed, RankA: rank1(a, s), RankB: rank1(b, s)})
		shown[s] = true
	}
	if f == h.ChallengerFromSlot-1 || h.ChallengerFromSlot <= 1 {
		rest := func(l []string) []string {
			return slices.DeleteFunc(slices.Clone(l), func(s string) bool { return shown[s] })
		}
		mid := p.Interleave(nil, rest(a), rest(b), n-f, seed)
		seen := 0
		for _, s := range mid { // a challenger slot past the cap is not shown
			if s.Team == Challenger && h.MaxChallengerSlots > 0 {
				if seen++; seen > h.MaxChallengerSlots {
					continue
				}
			}
			shown[s.Item] = true
		}
		seen = 0
		for _, s := range mid {
			s.RankA, s.RankB = rank1(a, s.Item), rank1(b, s.Item)
			if s.Team == Challenger && h.MaxChallengerSlots > 0 {
				if seen++; seen > h.MaxChallengerSlots {
					next := firstUnused(a, shown)
					if next == "" {
						continue
					}
					shown[next] = true
					s = Slot{Item: next, Team: Fixed, RankA: rank1(a, next), RankB: rank1(b, next)}
				}
			}
			want = append(want, s)
		}
	}
	if !slices.Equal(got, want) {
		t.Fatalf("%s hedge %+v n=%d seed=%d:\n got %s\nwant %s", ctx(), h, n, seed, names(got), names(want))
	}
	chall := 0
	for i, s := range got {
		if s.Team == Challenger {
			chall++
			if i < h.ChallengerFromSlot-1 {
				t.Fatalf("%s: challenger at slot %d, before slot %d", ctx(), i+1, h.ChallengerFromSlot)
			}
		}
	}
	if h.MaxChallengerSlots > 0 && chall > h.MaxChallengerSlots {
		t.Fatalf("%s: %d challenger slots, cap %d", ctx(), chall, h.MaxChallengerSlots)
	}
}

// TestHedgedCredit checks that Fixed slots earn nothing under either
// policy, and that balanced credit on a hedged list is the credit of the
// same clicks on the list the policy produced from the remaining items.
func TestHedgedCredit(t *testing.T) {
	a, b := items(0, 8), []string{"sku-002", "sku-000", "sku-101", "sku-005", "sku-001"}
	h := Hedge{ChallengerFromSlot: 3}
	r := rand.New(rand.NewPCG(3, 5))
	for seed := range uint64(30) {
		hedged := Interleave(Balanced{}, nil, a, b, 8, seed, h)
		plain := Balanced{}.Interleave(nil, a[2:], []string{"sku-002", "sku-101", "sku-005"}, 6, seed)
		for _, p := range testPolicies {
			if got := p.Credit(hedged, []Click{{0, 1}, {1, 1}}); got != (Score{}) {
				t.Fatalf("%s: clicks on Fixed slots earn %+v, want nothing", p.Name(), got)
			}
		}
		for range 10 {
			var onHedged, onPlain []Click
			for pos := range plain {
				if r.IntN(3) == 0 {
					onPlain = append(onPlain, Click{pos, 1})
					onHedged = append(onHedged, Click{pos + 2, 1})
				}
			}
			onHedged = append(onHedged, Click{1, 5}) // on a Fixed slot: ignored
			got, want := Balanced{}.Credit(hedged, onHedged), Balanced{}.Credit(plain, onPlain)
			if got != want {
				t.Fatalf("seed %d clicks %v: hedged credit %+v, want %+v", seed, onPlain, got, want)
			}
		}
	}
}

// FuzzInterleave feeds arbitrary comma-separated lists (repeats and empty
// items included) to both policies with and without hedges: no result may
// hold a duplicate, a rank out of range or one that names the wrong item,
// or be longer than asked, and credit must not fail on it.
func FuzzInterleave(f *testing.F) {
	f.Add("a,b,c", "b,c,a", 3, uint64(1), 0, 0)
	f.Add("a,a,b,,c", "c,,c,d", 10, uint64(99), 2, 1)
	f.Add("", "x,y", -1, uint64(0), 5, 0)
	f.Add("p,q,r,s,t", "t,s,r", 4, uint64(7), 3, 1)
	f.Fuzz(func(t *testing.T, as, bs string, n int, seed uint64, from, limit int) {
		a, b := strings.Split(as, ","), strings.Split(bs, ",")
		n %= 400
		h := Hedge{MaxChallengerSlots: limit % 50, ChallengerFromSlot: from % 50}
		for _, p := range testPolicies {
			for _, hh := range []Hedge{{}, h} {
				got := Interleave(p, nil, a, b, n, seed, hh)
				if len(got) > max(n, 0) || len(got) > union(a, b) {
					t.Fatalf("%s: %d slots for n=%d, |a ∪ b|=%d", p.Name(), len(got), n, union(a, b))
				}
				seen := map[string]bool{}
				for i, s := range got {
					if seen[s.Item] {
						t.Fatalf("%s: slot %d repeats %q", p.Name(), i, s.Item)
					}
					seen[s.Item] = true
					if s.RankA != rank1(a, s.Item) || s.RankB != rank1(b, s.Item) {
						t.Fatalf("%s: slot %d %q ranks (%d,%d)", p.Name(), i, s.Item, s.RankA, s.RankB)
					}
				}
				clicks := make([]Click, 0, len(got)+2)
				for i := -1; i <= len(got); i++ {
					clicks = append(clicks, Click{i, 1})
				}
				p.Credit(got, clicks)
			}
		}
	})
}

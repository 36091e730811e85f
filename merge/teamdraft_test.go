package merge

import (
	"fmt"
	"math/rand/v2"
	"slices"
	"testing"
)

// listPair is one pair of source lists the invariant tests run over.
type listPair struct {
	name string
	a, b []string
}

// items returns n invented garden-supply SKUs starting at first.
func items(first, n int) []string {
	out := make([]string, n)
	for i := range out {
		out[i] = fmt.Sprintf("sku-%03d", first+i)
	}
	return out
}

// listPairs returns hand-picked shapes (identical, reversed, disjoint,
// uneven, empty) plus random pairs drawn from a fixed seed, each list of
// distinct items as Policy.Interleave requires.
func listPairs() []listPair {
	ten := items(0, 10)
	rev := slices.Clone(ten)
	slices.Reverse(rev)
	pairs := []listPair{
		{"identical", ten, ten},
		{"reversed", ten, rev},
		{"disjoint", items(0, 6), items(100, 6)},
		{"a-short", items(0, 2), items(0, 9)},
		{"b-short", items(3, 9), items(5, 1)},
		{"a-empty", nil, items(0, 4)},
		{"both-empty", nil, nil},
		{"three", []string{"a", "b", "c"}, []string{"b", "c", "a"}},
	}
	r := rand.New(rand.NewPCG(7, 11))
	for i := range 60 {
		pool := items(0, 4+r.IntN(20))
		a := slices.Clone(pool)
		r.Shuffle(len(a), func(i, j int) { a[i], a[j] = a[j], a[i] })
		b := slices.Clone(pool)
		r.Shuffle(len(b), func(i, j int) { b[i], b[j] = b[j], b[i] })
		a = a[:r.IntN(len(a)+1)]
		b = b[:r.IntN(len(b)+1)]
		pairs = append(pairs, listPair{fmt.Sprintf("random-%d", i), a, b})
	}
	return pairs
}

// union returns the number of distinct items in a and b.
func union(a, b []string) int {
	set := map[string]bool{}
	for _, s := range append(slices.Clone(a), b...) {
		set[s] = true
	}
	return len(set)
}

// rank1 returns the 1-based rank of s in list, 0 when absent.
func rank1(list []string, s string) int32 {
	return int32(slices.Index(list, s) + 1)
}

// firstUnused returns list's highest-ranked item not in shown, "" if none.
func firstUnused(list []string, shown map[string]bool) string {
	for _, s := range list {
		if !shown[s] {
			return s
		}
	}
	return ""
}

// checkMerged checks the invariants every policy shares: right length,
// unique items, provenance ranks matching the source lists, each team's
// items drawn from its own list in that list's order.
func checkMerged(t *testing.T, got []Slot, a, b []string, n int) {
	t.Helper()
	if want := max(0, min(n, union(a, b))); len(got) != want {
		t.Fatalf("len = %d, want min(n=%d, |a ∪ b|=%d) = %d", len(got), n, union(a, b), want)
	}
	seen := map[string]bool{}
	lastA, lastB := int32(0), int32(0)
	for i, s := range got {
		if seen[s.Item] {
			t.Fatalf("slot %d: duplicate item %q", i, s.Item)
		}
		seen[s.Item] = true
		if ra, rb := rank1(a, s.Item), rank1(b, s.Item); s.RankA != ra || s.RankB != rb {
			t.Fatalf("slot %d %q: ranks (%d,%d), want (%d,%d)", i, s.Item, s.RankA, s.RankB, ra, rb)
		}
		switch s.Team {
		case Incumbent:
			if s.RankA <= lastA {
				t.Fatalf("slot %d: incumbent rank %d after %d breaks A's order", i, s.RankA, lastA)
			}
			lastA = s.RankA
		case Challenger:
			if s.RankB <= lastB {
				t.Fatalf("slot %d: challenger rank %d after %d breaks B's order", i, s.RankB, lastB)
			}
			lastB = s.RankB
		default:
			t.Fatalf("slot %d: team %v from a plain policy", i, s.Team)
		}
	}
}

// TestTeamDraftInvariants checks team-draft's defining properties
// (Radlinski, Kurup & Joachims, CIKM 2008, Algorithm 2) over many list
// pairs and seeds: while both lists have unused items, the team that picks
// is one with fewer picks, so sizes differ by at most one at every prefix;
// and every pick is the picking team's own highest-ranked unused item.
func TestTeamDraftInvariants(t *testing.T) {
	for _, p := range listPairs() {
		t.Run(p.name, func(t *testing.T) {
			for seed := range uint64(40) {
				for _, n := range []int{0, 1, 3, 10, 40} {
					got := TeamDraft{}.Interleave(nil, p.a, p.b, n, seed)
					checkMerged(t, got, p.a, p.b, n)
					checkDraft(t, got, p.a, p.b)
				}
			}
		})
	}
}

// checkDraft replays a team-draft list pick by pick.
func checkDraft(t *testing.T, got []Slot, a, b []string) {
	t.Helper()
	shown := map[string]bool{}
	na, nb := 0, 0
	for i, s := range got {
		nextA, nextB := firstUnused(a, shown), firstUnused(b, shown)
		both := nextA != "" && nextB != ""
		switch {
		case s.Team == Incumbent && s.Item != nextA:
			t.Fatalf("slot %d: incumbent picked %q, its best unused is %q", i, s.Item, nextA)
		case s.Team == Challenger && s.Item != nextB:
			t.Fatalf("slot %d: challenger picked %q, its best unused is %q", i, s.Item, nextB)
		case both && s.Team == Incumbent && na > nb, both && s.Team == Challenger && nb > na:
			t.Fatalf("slot %d: %v picked with %d picks against %d", i, s.Team, max(na, nb), min(na, nb))
		}
		if s.Team == Incumbent {
			na++
		} else {
			nb++
		}
		if both && (na-nb > 1 || nb-na > 1) {
			t.Fatalf("prefix %d: team sizes %d and %d differ by more than one", i+1, na, nb)
		}
		shown[s.Item] = true
	}
}

// TestTeamDraftFidelity enumerates every coin outcome and every position
// of a single uniformly random click, and checks that the expected credit
// difference is exactly zero: the fidelity condition of Hofmann, Whiteson &
// de Rijke, "Fidelity, soundness, and efficiency of interleaved comparison
// methods", ACM TOIS 31(4), 2013, section 4 (random clicks must not prefer
// either list). It holds whenever neither list runs out before the other,
// as for two orderings of the same items or disjoint equal-length lists.
func TestTeamDraftFidelity(t *testing.T) {
	perms := permutations([]string{"p", "q", "r", "s"})
	var pairs []listPair
	for i, a := range perms {
		for j, b := range perms {
			pairs = append(pairs, listPair{fmt.Sprint(i, j), a, b})
		}
	}
	pairs = append(pairs, listPair{"disjoint", items(0, 4), items(10, 4)})
	for _, p := range pairs {
		for n := 1; n <= len(p.a); n++ {
			if got := expectedDiff(p.a, p.b, n); got != 0 {
				t.Fatalf("a=%v b=%v n=%d: expected credit difference %v, want 0", p.a, p.b, n, got)
			}
		}
	}
}

// TestTeamDraftFidelityNeedsBothLists shows the enumeration can fail: when
// the incumbent list A=(a,b) is used up, the challenger B=(b,a,c,d) fills
// the rest, and a random click favours it. Worked by hand: whichever team
// starts, the list is one incumbent slot and three challenger slots, so the
// expected difference (incumbent minus challenger) is (1-3)/4 = -1/2.
func TestTeamDraftFidelityNeedsBothLists(t *testing.T) {
	got := expectedDiff([]string{"a", "b"}, []string{"b", "a", "c", "d"}, 4)
	if got != -0.5 {
		t.Fatalf("expected credit difference %v, want -0.5", got)
	}
}

// expectedDiff is E[incumbent credit - challenger credit] for one click on
// a uniformly random position, over every outcome of n fair coins (team
// draft never flips more than n times for n slots).
func expectedDiff(a, b []string, n int) float64 {
	var sum float64
	var count int
	for script := range uint64(1) << n {
		c := coins{scripted: true, script: script}
		slots := teamDraft(nil, a, b, n, &c)
		for pos := range slots {
			s := TeamDraft{}.Credit(slots, []Click{{Pos: pos, Weight: 1}})
			sum += s.Incumbent - s.Challenger
			count++
		}
	}
	return sum / float64(count)
}

// permutations returns every ordering of items.
func permutations(items []string) [][]string {
	if len(items) <= 1 {
		return [][]string{slices.Clone(items)}
	}
	var out [][]string
	for i := range items {
		rest := slices.Concat(items[:i], items[i+1:])
		for _, p := range permutations(rest) {
			out = append(out, append([]string{items[i]}, p...))
		}
	}
	return out
}

// TestTeamDraftCoinIsFair checks that the first pick goes to each team about
// half the time over many seeds: within four standard deviations of a fair
// binomial (sd = sqrt(0.25/4000) ≈ 0.0079), the usual normal approximation.
func TestTeamDraftCoinIsFair(t *testing.T) {
	const trials = 4000
	a, b := items(0, 5), items(100, 5)
	first := 0
	for seed := range uint64(trials) {
		if (TeamDraft{}).Interleave(nil, a, b, 5, seed)[0].Team == Incumbent {
			first++
		}
	}
	if share := float64(first) / trials; share < 0.5-0.032 || share > 0.5+0.032 {
		t.Fatalf("incumbent picked first in %.3f of %d seeds, want 0.5 ± 0.032", share, trials)
	}
}

// TestTeamDraftDeterministic checks that a seed fixes the result, whether
// or not dst is reused, and that seeds do vary it.
func TestTeamDraftDeterministic(t *testing.T) {
	a, b := items(0, 10), items(5, 10)
	var dst []Slot
	variants := map[string]bool{}
	for seed := range uint64(50) {
		first := TeamDraft{}.Interleave(nil, a, b, 10, seed)
		dst = TeamDraft{}.Interleave(dst, a, b, 10, seed)
		if !slices.Equal(first, dst) {
			t.Fatalf("seed %d: %v then %v", seed, first, dst)
		}
		variants[fmt.Sprint(first)] = true
	}
	if len(variants) < 2 {
		t.Fatalf("50 seeds gave %d distinct lists, want several", len(variants))
	}
}

// TestTeamDraftCredit checks team-draft's credit rule (Radlinski, Kurup &
// Joachims 2008, section 4) on hand-worked lists. A=(a,b,c), B=(b,a,d);
// with the incumbent winning both coins the draft is a(I) b(C) c(I) d(C);
// with the challenger winning the first it is b(C) a(I) then, after the
// second coin, c(I) d(C) or d(C) c(I).
func TestTeamDraftCredit(t *testing.T) {
	a, b := []string{"a", "b", "c"}, []string{"b", "a", "d"}
	incFirst := draftScripted(a, b, 0b11)
	chFirst := draftScripted(a, b, 0b00)
	tests := []struct {
		name   string
		slots  []Slot
		clicks []Click
		want   Score
	}{
		{"item in both lists credits its picker", incFirst, []Click{{Pos: 1, Weight: 1}}, Score{0, 1}},
		{"same item picked by the other team", chFirst, []Click{{Pos: 1, Weight: 1}}, Score{1, 0}},
		{"weights add per team", incFirst, []Click{{0, 1}, {2, 3}, {3, 1}}, Score{4, 1}},
		{"out of range ignored", incFirst, []Click{{-1, 1}, {4, 1}}, Score{}},
		{"fixed earns nothing", []Slot{{Item: "a", Team: Fixed, RankA: 1}}, []Click{{0, 1}}, Score{}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if got := (TeamDraft{}).Credit(tt.slots, tt.clicks); got != tt.want {
				t.Errorf("Credit = %+v, want %+v", got, tt.want)
			}
		})
	}
	if got := names(incFirst); got != "a:incumbent b:challenger c:incumbent d:challenger" {
		t.Errorf("incumbent-first draft = %s", got)
	}
	if got := names(chFirst); got != "b:challenger a:incumbent d:challenger c:incumbent" {
		t.Errorf("challenger-first draft = %s", got)
	}
}

// draftScripted runs team draft with the given coin bits (1 = incumbent).
func draftScripted(a, b []string, script uint64) []Slot {
	c := coins{scripted: true, script: script}
	return teamDraft(nil, a, b, len(a)+len(b), &c)
}

// names renders slots as item:team pairs.
func names(slots []Slot) string {
	var s string
	for i, sl := range slots {
		if i > 0 {
			s += " "
		}
		s += sl.Item + ":" + sl.Team.String()
	}
	return s
}

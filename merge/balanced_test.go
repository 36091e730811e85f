package merge

import (
	"slices"
	"testing"
)

// TestBalancedInvariants checks balanced interleaving's defining property
// (Joachims, KDD 2002, section 3; Joachims 2003): while both lists have
// items left, every prefix of the merged list is the union of a top-ka of
// A and a top-kb of B with |ka-kb| <= 1.
func TestBalancedInvariants(t *testing.T) {
	for _, p := range listPairs() {
		t.Run(p.name, func(t *testing.T) {
			for seed := range uint64(40) {
				for _, n := range []int{0, 1, 3, 10, 40} {
					got := Balanced{}.Interleave(nil, p.a, p.b, n, seed)
					checkMerged(t, got, p.a, p.b, n)
					checkBalancedPrefixes(t, got, p.a, p.b)
				}
			}
		})
	}
}

// checkBalancedPrefixes searches, for each prefix, a (ka, kb) pair with
// |ka-kb| <= 1 whose tops make up exactly the prefix's items.
func checkBalancedPrefixes(t *testing.T, got []Slot, a, b []string) {
	t.Helper()
	shown := map[string]bool{}
	for l, s := range got {
		shown[s.Item] = true
		if firstUnused(a, shown) == "" || firstUnused(b, shown) == "" {
			return // one list is used up: the other fills the rest
		}
		if !topsMakeUp(shown, a, b) {
			t.Fatalf("prefix %d %v is no union of top-ka of %v and top-kb of %v with |ka-kb|<=1",
				l+1, names(got[:l+1]), a, b)
		}
	}
}

// topsMakeUp reports whether some ka, kb with |ka-kb| <= 1 have
// set(a[:ka]) ∪ set(b[:kb]) equal to shown.
func topsMakeUp(shown map[string]bool, a, b []string) bool {
	for ka := 0; ka <= len(a); ka++ {
		for kb := max(0, ka-1); kb <= min(len(b), ka+1); kb++ {
			u := map[string]bool{}
			for _, s := range slices.Concat(a[:ka], b[:kb]) {
				u[s] = true
			}
			if len(u) == len(shown) && func() bool {
				for s := range u {
					if !shown[s] {
						return false
					}
				}
				return true
			}() {
				return true
			}
		}
	}
	return false
}

// TestBalancedBias checks the known bias of balanced interleaving under
// random clicks, derived here from its definition: for A=(a,b,c) and
// B=(b,c,a) the merged list is (a,b,c) when A leads and (b,a,c) when B
// leads. With k the better rank of the clicked item, a click on a credits A
// (k=1), on b credits B (k=1), and on c credits B (k=2: c is B's second but
// A's third). So B wins two of the three single clicks whichever list goes
// first, though the lists are equally good. Hofmann, Whiteson & de Rijke
// (CIKM 2011, section 3) use this kind of example to show the bias
// (recalled from memory).
func TestBalancedBias(t *testing.T) {
	a, b := []string{"a", "b", "c"}, []string{"b", "c", "a"}
	for _, lead := range []struct {
		script uint64
		want   string
	}{
		{1, "a:incumbent b:challenger c:challenger"},
		{0, "b:challenger a:incumbent c:challenger"},
	} {
		c := coins{scripted: true, script: lead.script}
		slots := balanced(nil, a, b, 3, &c)
		if got := names(slots); got != lead.want {
			t.Fatalf("lead %d: merged %s, want %s", lead.script, got, lead.want)
		}
		bWins := 0
		for pos := range slots {
			s := Balanced{}.Credit(slots, []Click{{Pos: pos, Weight: 1}})
			if Decide(s, true) == ChallengerWin {
				bWins++
			}
		}
		if bWins != 2 {
			t.Errorf("lead %d: B wins %d of 3 single clicks, want 2", lead.script, bWins)
		}
	}
}

// TestBalancedCredit checks the credit rule on hand-worked cases.
// A=(a,b,c,d), B=(c,d,a,e); with A leading the merged list is
// a(A1,B3) c(A3,B1) b(A2) d(A4,B2) e(B4).
func TestBalancedCredit(t *testing.T) {
	c := coins{scripted: true, script: 1}
	slots := balanced(nil, []string{"a", "b", "c", "d"}, []string{"c", "d", "a", "e"}, 5, &c)
	if got, want := names(slots), "a:incumbent c:challenger b:incumbent d:challenger e:challenger"; got != want {
		t.Fatalf("merged %s, want %s", got, want)
	}
	tests := []struct {
		name   string
		clicks []Click
		want   Score
	}{
		// Lowest click a: k = min(1, 3) = 1; a is A's first.
		{"top click", []Click{{0, 1}}, Score{1, 0}},
		// Lowest click c: k = 1; c is B's first; a (A1) also counts for A.
		{"two clicks within k=1", []Click{{0, 1}, {1, 1}}, Score{1, 1}},
		// Lowest click b decides k = 2: a (A1, B3) counts for A only, b (A2) for A.
		{"lowest click decides k", []Click{{0, 1}, {2, 1}}, Score{2, 0}},
		// Same clicks plus d: k = min(4, 2) = 2; a, b for A; d (B2) for B.
		{"lower click widens k", []Click{{0, 1}, {2, 1}, {3, 1}}, Score{2, 1}},
		// Lowest click e (B4 only): k = 4, every item both lists rank counts for both.
		{"k from the only list holding it", []Click{{0, 2}, {4, 1}}, Score{2, 3}},
		{"out of range ignored", []Click{{-1, 1}, {9, 1}}, Score{}},
		{"no clicks", nil, Score{}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if got := (Balanced{}).Credit(slots, tt.clicks); got != tt.want {
				t.Errorf("Credit = %+v, want %+v", got, tt.want)
			}
		})
	}
}

// TestBalancedDeterministic checks that a seed fixes the result and that
// both leads occur.
func TestBalancedDeterministic(t *testing.T) {
	a, b := items(0, 10), items(5, 10)
	leads := map[Team]bool{}
	var dst []Slot
	for seed := range uint64(50) {
		first := Balanced{}.Interleave(nil, a, b, 10, seed)
		dst = Balanced{}.Interleave(dst, a, b, 10, seed)
		if !slices.Equal(first, dst) {
			t.Fatalf("seed %d: %v then %v", seed, first, dst)
		}
		leads[first[0].Team] = true
	}
	if len(leads) != 2 {
		t.Fatalf("50 seeds led with %v only, want both lists", leads)
	}
}

package merge

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"sync"
	"testing"
)

// oiList is one merged list with the probability the solved program gives it.
type oiList struct {
	items []string
	p     float64
}

// oiDistribution returns the solver's distribution over concrete merged
// lists (the first min(n, OptimizedDepth) slots) for a and b, failing the
// test if the program could not be solved.
func oiDistribution(t *testing.T, o *Optimized, a, b []string, n int) []oiList {
	t.Helper()
	x := newWorkspace(a, b)
	st := newOptStructure(x[:len(a)], x[len(a):], min(n, OptimizedDepth))
	sol, err := o.solve(st.key)
	if err != nil {
		t.Fatalf("a=%v b=%v: %v", a, b, err)
	}
	var out []oiList
	for k, list := range sol.lists {
		var names []string
		for _, v := range list[:st.depth] {
			if v < st.la {
				names = append(names, a[st.posA[v]])
			} else {
				names = append(names, b[st.posB[st.onlyB[v-st.la]]])
			}
		}
		out = append(out, oiList{items: names, p: sol.p[k]})
	}
	return out
}

// oiAllowed reports whether list is allowed by the definition of Radlinski
// & Craswell (WSDM 2013, section 4): every prefix is, as a set, the union of
// a top-i of a and a top-j of b.
func oiAllowed(list, a, b []string) bool {
	for k := 1; k <= len(list); k++ {
		prefix := map[string]bool{}
		for _, s := range list[:k] {
			prefix[s] = true
		}
		ok := false
		for i := 0; i <= len(a) && !ok; i++ {
			for j := 0; j <= len(b) && !ok; j++ {
				u := map[string]bool{}
				for _, s := range a[:i] {
					u[s] = true
				}
				for _, s := range b[:j] {
					u[s] = true
				}
				ok = len(u) == len(prefix) && oiSubset(prefix, u)
			}
		}
		if !ok {
			return false
		}
	}
	return true
}

// oiUnion counts the distinct items of the top t of a and of b.
func oiUnion(a, b []string, t int) int {
	u := map[string]bool{}
	for _, s := range a[:min(t, len(a))] {
		u[s] = true
	}
	for _, s := range b[:min(t, len(b))] {
		u[s] = true
	}
	return len(u)
}

func oiSubset(x, y map[string]bool) bool {
	for s := range x {
		if !y[s] {
			return false
		}
	}
	return true
}

// oiDelta is the rank-difference credit of a click on item for lists a and
// b seen to depth t (ranks past t, and absence, count as t+1), written from
// Radlinski & Craswell (WSDM 2013, section 4.1) without the policy's code;
// positive favours b.
func oiDelta(item string, a, b []string, t int, inverse bool) float64 {
	rank := func(list []string) float64 {
		for i, s := range list {
			if s == item && i < t {
				return float64(i + 1)
			}
		}
		return float64(t + 1)
	}
	ra, rb := rank(a), rank(b)
	if inverse {
		return 1/rb - 1/ra
	}
	return ra - rb
}

// oiCheck checks a solved distribution against the definition: a
// probability distribution, over allowed lists only, under which a click
// falling uniformly at random on the top k slots earns zero expected
// credit for every cutoff k. When a list runs out within the depth no such
// distribution need exist; then the total absolute bias over the cutoffs
// must be no more than that of choosing between the two lists' best
// unshown items by a fair coin, one allowed distribution among many.
func oiCheck(t *testing.T, dist []oiList, a, b []string, inverse bool) {
	t.Helper()
	sum := 0.0
	for _, l := range dist {
		if l.p < 0 || l.p > 1 {
			t.Fatalf("a=%v b=%v: list %v has probability %v", a, b, l.items, l.p)
		}
		if !oiAllowed(l.items, a, b) {
			t.Fatalf("a=%v b=%v: list %v is not allowed", a, b, l.items)
		}
		sum += l.p
	}
	if math.Abs(sum-1) > 1e-9 {
		t.Fatalf("a=%v b=%v: probabilities sum to %v", a, b, sum)
	}
	depth := len(dist[0].items)
	if len(a) < depth || len(b) < depth {
		coin := oiCoin(a, b, depth)
		if got, limit := oiTotalBias(dist, a, b, inverse), oiTotalBias(coin, a, b, inverse); got > limit*(1+1e-5)+1e-7 {
			t.Fatalf("a=%v b=%v inverse=%v: total bias %.4g, more than the fair coin's %.4g", a, b, inverse, got, limit)
		}
		return
	}
	for k := 1; k <= depth; k++ {
		bias, want := 0.0, 0.0
		for _, l := range dist {
			for _, s := range l.items[:k] {
				bias += l.p * oiDelta(s, a, b, depth, inverse) / float64(k)
			}
		}
		if k == depth && oiUnion(a, b, depth) == depth {
			// Every list shows all items of both tops (one list ran out):
			// the full list's credit is the same for all of them, which
			// no distribution can change, so it is what the test expects.
			for _, s := range dist[0].items {
				want += oiDelta(s, a, b, depth, inverse) / float64(k)
			}
		}
		if math.Abs(bias-want) > 1e-7 {
			t.Fatalf("a=%v b=%v inverse=%v: expected credit of a random click in the top %d is %.3g, want 0",
				a, b, inverse, k, bias)
		}
	}
}

// oiPairs returns hand-picked pairs and random ones over a small catalogue,
// so that overlaps of every kind turn up.
func oiPairs() [][2][]string {
	pairs := [][2][]string{
		{{"a", "b", "c"}, {"b", "c", "a"}},
		{{"a", "b", "c", "d"}, {"d", "c", "b", "a"}},
		{{"a", "b", "c"}, {"x", "y", "z"}},
		{{"a", "b", "c"}, {"a", "b", "c"}},
		{{"a", "b"}, {"c", "d", "e", "a", "f"}},
		{{"a"}, {"b"}},
	}
	r := rand.New(rand.NewPCG(3, 4))
	for range 40 {
		pool := r.Perm(16)
		a := make([]string, 1+r.IntN(10))
		b := make([]string, 1+r.IntN(10))
		for i := range a {
			a[i] = fmt.Sprintf("s%d", pool[i])
		}
		perm := r.Perm(16)
		for i := range b {
			b[i] = fmt.Sprintf("s%d", pool[perm[i]])
		}
		pairs = append(pairs, [2][]string{a, b})
	}
	return pairs
}

// TestOptimizedSolution checks the program's solutions for many pairs and
// both credit functions, independently of the solver.
func TestOptimizedSolution(t *testing.T) {
	for _, credit := range []string{CreditLinear, CreditInverseRank} {
		o, err := NewOptimized(credit, -1)
		if err != nil {
			t.Fatal(err)
		}
		for _, p := range oiPairs() {
			for _, n := range []int{3, 10} {
				oiCheck(t, oiDistribution(t, o, p[0], p[1], n), p[0], p[1], o.inverse)
			}
		}
	}
}

// TestOptimizedInterleave checks served lists against the solution: the
// drawn part is a list of positive probability, drawn about as often as its
// probability says; the tail past OptimizedDepth is unique and complete.
func TestOptimizedInterleave(t *testing.T) {
	o, _ := NewOptimized("", 0)
	const draws = 4000
	for _, p := range oiPairs()[:12] {
		a, b := p[0], p[1]
		dist := oiDistribution(t, o, a, b, 10)
		want := map[string]float64{}
		for _, l := range dist {
			want[strings.Join(l.items, ",")] = l.p
		}
		seen := map[string]int{}
		for seed := range uint64(draws) {
			slots := o.Interleave(nil, a, b, 10, seed*0x9e3779b97f4a7c15)
			piCheckList(t, slots, a, b, 10, false)
			key := piNames(slots)
			if _, ok := want[key]; !ok {
				t.Fatalf("a=%v b=%v: served %s, not in the solution", a, b, key)
			}
			seen[key]++
		}
		for key, pr := range want {
			got := float64(seen[key]) / draws
			if se := math.Sqrt(pr * (1 - pr) / draws); math.Abs(got-pr) > 5*se+1e-9 {
				t.Errorf("a=%v b=%v: %s served %.4f of the time, want %.4f", a, b, key, got, pr)
			}
		}
	}
	long1, long2 := piItems(0, 30), piItems(20, 30)
	for seed := range uint64(20) {
		slots := o.Interleave(nil, long1, long2, 25, seed)
		piCheckList(t, slots, long1, long2, 25, false)
		if !oiAllowed(strings.Split(piNames(slots[:OptimizedDepth]), ","), long1, long2) {
			t.Fatalf("seed %d: drawn part %s not allowed", seed, piNames(slots[:OptimizedDepth]))
		}
	}
}

// TestOptimizedCredit checks the rank-difference credit on hand-worked
// cases (Radlinski & Craswell, WSDM 2013, section 4.1).
func TestOptimizedCredit(t *testing.T) {
	// Three slots, so ranks past 3 and absence count as 4.
	slots := []Slot{
		{Item: "a", Team: Incumbent, RankA: 1, RankB: 3},
		{Item: "b", Team: Challenger, RankA: 2, RankB: 1},
		{Item: "x", Team: Challenger, RankA: 0, RankB: 2},
	}
	tests := []struct {
		credit string
		clicks []Click
		want   Score
	}{
		{CreditLinear, []Click{{0, 1}}, Score{Incumbent: 2}},  // 1 - 3
		{CreditLinear, []Click{{1, 1}}, Score{Challenger: 1}}, // 2 - 1
		{CreditLinear, []Click{{2, 3}}, Score{Challenger: 6}}, // 3 * (4 - 2)
		{CreditLinear, []Click{{0, 1}, {1, 1}}, Score{Incumbent: 2, Challenger: 1}},
		{CreditInverseRank, []Click{{0, 1}}, Score{Incumbent: 1 - 1.0/3}},   // 1/3 - 1/1
		{CreditInverseRank, []Click{{2, 1}}, Score{Challenger: 0.5 - 0.25}}, // 1/2 - 1/4
		{CreditLinear, []Click{{3, 1}, {-1, 1}}, Score{}},
	}
	for _, tc := range tests {
		o, _ := NewOptimized(tc.credit, -1)
		got := o.Credit(slots, tc.clicks)
		if math.Abs(got.Incumbent-tc.want.Incumbent) > 1e-12 || math.Abs(got.Challenger-tc.want.Challenger) > 1e-12 {
			t.Errorf("%s %v: got %+v, want %+v", tc.credit, tc.clicks, got, tc.want)
		}
	}
	// Past OptimizedDepth, team draft's rule: the slot's team earns the click.
	long := make([]Slot, OptimizedDepth+2)
	for i := range long {
		long[i] = Slot{Item: fmt.Sprint(i), Team: Challenger, RankA: int32(i + 1), RankB: int32(i + 1)}
	}
	o, _ := NewOptimized("", -1)
	if got := o.Credit(long, []Click{{OptimizedDepth, 2}, {0, 1}}); got != (Score{Challenger: 2}) {
		t.Errorf("tail click: got %+v, want the team's 2", got)
	}
}

// TestOptimizedFidelityByEnumeration checks zero expected credit end to
// end, from served lists: over the served distribution (enumerated from
// the solution) every single uniformly random click has expected
// Challenger - Incumbent zero when credited from the logged slots.
func TestOptimizedFidelityByEnumeration(t *testing.T) {
	o, _ := NewOptimized(CreditInverseRank, 0)
	for _, p := range oiPairs() {
		a, b := p[0], p[1]
		if len(a) != len(b) {
			continue // a list would run out: see oiCheck
		}
		dist := oiDistribution(t, o, a, b, 10)
		total := 0.0
		for _, l := range dist {
			slots := make([]Slot, len(l.items))
			for i, s := range l.items {
				slots[i] = Slot{Item: s, RankA: piFirst(a, s), RankB: piFirst(b, s)}
			}
			for pos := range slots {
				s := o.Credit(slots, []Click{{Pos: pos, Weight: 1}})
				total += l.p * (s.Challenger - s.Incumbent)
			}
		}
		if math.Abs(total) > 1e-7 {
			t.Errorf("a=%v b=%v: expected credit %.3g, want 0", a, b, total)
		}
	}
}

// TestNewOptimized checks option validation.
func TestNewOptimized(t *testing.T) {
	if _, err := NewOptimized("quadratic", 0); !errors.Is(err, ErrBadOption) {
		t.Errorf("credit quadratic: err %v, want ErrBadOption", err)
	}
	for _, c := range []string{"", CreditLinear, CreditInverseRank} {
		o, err := NewOptimized(c, 0)
		if err != nil || o.Name() != "optimized" {
			t.Errorf("credit %q: %v, %v", c, o, err)
		}
	}
	var zero Optimized // the zero value works, uncached
	piCheckList(t, zero.Interleave(nil, piItems(0, 5), piItems(2, 5), 5, 1), piItems(0, 5), piItems(2, 5), 5, false)
}

// TestOptimizedCache checks that the cache is bounded, evicts the least
// recently used structure, and serves identical lists concurrently.
func TestOptimizedCache(t *testing.T) {
	o, _ := NewOptimized("", 2)
	a := piItems(0, 5)
	shapes := [][]string{piItems(1, 5), piItems(2, 5), piItems(3, 5)}
	keyOf := func(b []string) optKey {
		x := newWorkspace(a, b)
		return newOptStructure(x[:len(a)], x[len(a):], 5).key
	}
	o.Interleave(nil, a, shapes[0], 5, 1)
	o.Interleave(nil, a, shapes[1], 5, 1)
	o.Interleave(nil, a, shapes[0], 5, 1) // shapes[0] now most recent
	o.Interleave(nil, a, shapes[2], 5, 1) // evicts shapes[1]
	if got := o.cache.count(); got != 2 {
		t.Fatalf("cache holds %d, want 2", got)
	}
	for i, want := range []bool{true, false, true} {
		if _, ok := o.cache.get(keyOf(shapes[i])); ok != want {
			t.Errorf("shape %d cached = %v, want %v", i, ok, want)
		}
	}
	uncached, _ := NewOptimized("", -1)
	var wg sync.WaitGroup
	for g := range 8 {
		wg.Go(func() {
			for seed := range uint64(50) {
				b := shapes[(int(seed)+g)%3]
				got := piNames(o.Interleave(nil, a, b, 5, seed))
				if want := piNames(uncached.Interleave(nil, a, b, 5, seed)); got != want {
					t.Errorf("seed %d: cached %s, uncached %s", seed, got, want)
				}
			}
		})
	}
	wg.Wait()
}

package merge

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

// oiTotalBias is the sum over cutoffs k of the absolute expected credit of
// the top k slots.
func oiTotalBias(dist []oiList, a, b []string, inverse bool) float64 {
	depth := len(dist[0].items)
	total := 0.0
	for k := 1; k <= depth; k++ {
		bias := 0.0
		for _, l := range dist {
			for _, s := range l.items[:k] {
				bias += l.p * oiDelta(s, a, b, depth, inverse)
			}
		}
		total += math.Abs(bias)
	}
	return total
}

// oiCoin is the distribution of allowed lists of length depth where each
// slot takes a's or b's best unshown item by a fair coin.
func oiCoin(a, b []string, depth int) []oiList {
	var out []oiList
	var walk func(cur []string, p float64)
	walk = func(cur []string, p float64) {
		if len(cur) == depth {
			out = append(out, oiList{items: cur, p: p})
			return
		}
		var cands []string
		for _, list := range [][]string{a, b} {
			for _, s := range list {
				if !piContains(cur, s) {
					if !piContains(cands, s) {
						cands = append(cands, s)
					}
					break
				}
			}
		}
		for _, s := range cands {
			walk(append(append([]string(nil), cur...), s), p/float64(len(cands)))
		}
	}
	walk(nil, 1)
	return out
}

// TestOptimizedEveryStructure solves every overlap structure of two lists
// of up to 4 items (each challenger item either new or one of the
// incumbent's), at a depth both lists reach, where an unbiased
// distribution must be found, and at the full length, where one list may
// run out.
func TestOptimizedEveryStructure(t *testing.T) {
	count := 0
	for la := 1; la <= 4; la++ {
		for lb := 1; lb <= 4; lb++ {
			a := make([]string, la)
			for i := range a {
				a[i] = fmt.Sprintf("a%d", i)
			}
			for _, b := range oiChallengers(a, lb) {
				for _, inverse := range []bool{false, true} {
					o := &Optimized{inverse: inverse}
					for _, n := range []int{min(la, lb), la + lb} {
						oiCheck(t, oiDistribution(t, o, a, b, n), a, b, inverse)
						count++
					}
				}
			}
		}
	}
	if count < 500 {
		t.Errorf("checked %d structures; the enumeration is broken", count)
	}
}

// oiChallengers returns every list of lb distinct items drawn from a or new.
func oiChallengers(a []string, lb int) [][]string {
	var out [][]string
	var walk func(cur []string)
	walk = func(cur []string) {
		if len(cur) == lb {
			out = append(out, append([]string(nil), cur...))
			return
		}
		walk(append(cur, fmt.Sprintf("new%d", len(cur))))
		for _, s := range a {
			if !piContains(cur, s) {
				walk(append(cur, s))
			}
		}
	}
	walk(nil)
	return out
}

// TestOptimizedManyStructures solves random overlap structures of two
// lists that both reach depth 10, the most common case in service: each
// must be solved exactly (no fallback) and pass oiCheck.
func TestOptimizedManyStructures(t *testing.T) {
	r := rand.New(rand.NewPCG(21, 22))
	for i := range 30 {
		pool := 10 + r.IntN(25)
		pa, pb := r.Perm(pool), r.Perm(pool)
		a, b := make([]string, 10), make([]string, 10+r.IntN(3))
		for k := range a {
			a[k] = fmt.Sprintf("g%d", pa[k])
		}
		for k := range b {
			b[k] = fmt.Sprintf("g%d", pb[k%pool])
		}
		b = b[:min(len(b), pool)] // b[k%pool] repeats past the pool
		o := &Optimized{inverse: i%2 == 1}
		oiCheck(t, oiDistribution(t, o, a, b, 10), a, b, o.inverse)
	}
}

// TestOptSimplexWorkBound checks that a simplex run reading more matrix
// entries than its bound ends in an error, not a hang or a panic.
func TestOptSimplexWorkBound(t *testing.T) {
	a := optDense([][]float64{{1, 1, 1}, {1, -1, 2}})
	b := []float64{1, 0}
	if _, err := optSimplex([]float64{0, 0, -1}, a, b, 10); !errors.Is(err, errOptWork) {
		t.Errorf("bound 10: err %v, want errOptWork", err)
	}
	x, err := optSimplex([]float64{0, 0, -1}, a, b, optWork)
	// Maximise x3 subject to x1 + x2 + x3 = 1, x1 - x2 + 2 x3 = 0: x3 = 1/3
	// with x2 = 2/3 (worked by hand).
	if err != nil || math.Abs(x[2]-1.0/3) > 1e-9 || math.Abs(x[1]-2.0/3) > 1e-9 {
		t.Errorf("got %v, %v; want x = (0, 2/3, 1/3)", x, err)
	}
}

// TestOptFallback checks the last-resort distribution (a fair coin between
// the two lists' best unshown items): it covers every allowed list once,
// and its probabilities, a product of halves, sum to one.
func TestOptFallback(t *testing.T) {
	a, b := []string{"a", "b", "c"}, []string{"c", "x", "a"}
	x := newWorkspace(a, b)
	st := newOptStructure(x[:3], x[3:], 4)
	sol := optFallback(st.key)
	coin := oiCoin(a, b, 4)
	if len(sol.p) != len(coin) || math.Abs(sol.cum[len(sol.cum)-1]-1) > 1e-12 {
		t.Fatalf("fallback has %d lists ending at %v; want %d ending at 1", len(sol.p), sol.cum[len(sol.cum)-1], len(coin))
	}
	want := map[float64]int{}
	for _, l := range coin {
		want[l.p]++
	}
	for _, p := range sol.p {
		want[p]--
	}
	for p, n := range want {
		if n != 0 {
			t.Errorf("probability %v: %d more in the coin's distribution than the fallback's", p, n)
		}
	}
}

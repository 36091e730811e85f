package merge

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// piRef is one merged list probabilistic interleaving can produce, as the
// published definition gives it, with its probability and per-slot draw
// probabilities.
type piRef struct {
	items  []string
	p      float64
	pa, pb []float64
}

// piReference enumerates every merged list of length n with its
// probability straight from the definition in Hofmann, Whiteson & de
// Rijke (CIKM 2011, section 4): a fair coin picks a list, the list draws an
// unshown item with probability rank^-tau over its unshown items, and a
// list with nothing left to draw leaves the slot to the other. It shares no
// code with the policy.
func piReference(a, b []string, n int, tau float64) []piRef {
	var out []piRef
	var walk func(shown []string, p float64, pa, pb []float64)
	walk = func(shown []string, p float64, pa, pb []float64) {
		da, db := piRefDist(a, shown, tau), piRefDist(b, shown, tau)
		if len(shown) == n || len(da)+len(db) == 0 {
			out = append(out, piRef{items: shown, p: p, pa: pa, pb: pb})
			return
		}
		coin := map[string]float64{}
		for d, q := range da {
			if len(db) == 0 {
				coin[d] += q
			} else {
				coin[d] += q / 2
			}
		}
		for d, q := range db {
			if len(da) == 0 {
				coin[d] += q
			} else {
				coin[d] += q / 2
			}
		}
		for d, q := range coin {
			next := append(append([]string(nil), shown...), d)
			walk(next, p*q, append(append([]float64(nil), pa...), da[d]),
				append(append([]float64(nil), pb...), db[d]))
		}
	}
	walk(nil, 1, nil, nil)
	return out
}

// piRefDist is one list's softmax over its items not in shown.
func piRefDist(list, shown []string, tau float64) map[string]float64 {
	d := map[string]float64{}
	sum := 0.0
	for r, item := range list {
		if !piContains(shown, item) {
			d[item] = math.Pow(float64(r+1), -tau)
			sum += d[item]
		}
	}
	for k := range d {
		d[k] /= sum
	}
	return d
}

func piContains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}

// piPairs are list pairs of equal length where no list runs out before the
// merged list is full, so the coin is fair at every slot.
var piPairs = []struct {
	name string
	a, b []string
}{
	{"rotated", []string{"a", "b", "c"}, []string{"b", "c", "a"}},
	{"reversed", []string{"a", "b", "c", "d"}, []string{"d", "c", "b", "a"}},
	{"partial overlap", []string{"a", "b", "c", "d"}, []string{"e", "a", "f", "b"}},
	{"disjoint", []string{"a", "b", "c"}, []string{"x", "y", "z"}},
	{"identical", []string{"a", "b", "c"}, []string{"a", "b", "c"}},
}

// TestRankProbabilities checks the first draw against the published
// softmax: over 10 documents with tau = 3, ranks 1-4 are drawn with
// probabilities 0.835, 0.104, 0.031 and 0.013 (Hofmann, Whiteson & de
// Rijke, CIKM 2011, section 4, P(d) = r(d)^-tau / sum r(d')^-tau, computed
// from the formula: sum over r = 1..10 of r^-3 is 1.19753).
func TestRankProbabilities(t *testing.T) {
	want := []float64{0.835, 0.104, 0.031, 0.013}
	got := RankProbabilities(10, 3)
	for i, w := range want {
		if math.Abs(got[i]-w) > 0.0005 {
			t.Errorf("rank %d: got %.4f, want %.3f", i+1, got[i], w)
		}
	}
	sum := 0.0
	for _, p := range got {
		sum += p
	}
	if math.Abs(sum-1) > 1e-12 {
		t.Errorf("probabilities sum to %v, want 1", sum)
	}
	if d := RankProbabilities(10, 0); d[0] != got[0] {
		t.Errorf("tau 0: first rank %v, want the default tau's %v", d[0], got[0])
	}
	// The policy's first slot, drawn from the incumbent's list of 10 when
	// the lists are disjoint, logs the same probability.
	a, b := piItems(0, 10), piItems(100, 10)
	for seed := range uint64(200) {
		s := Probabilistic{}.Interleave(nil, a, b, 1, seed)[0]
		if s.Team == Incumbent && math.Abs(float64(s.PA)-got[s.RankA-1]) > 1e-6 {
			t.Fatalf("seed %d: first slot rank %d logs PA %v, want %v", seed, s.RankA, s.PA, got[s.RankA-1])
		}
	}
}

// TestProbabilisticMatchesDefinition checks every produced list, and its
// logged PA and PB, against the enumerated definition, and that lists turn
// up as often as their probability says (within 5 standard errors).
func TestProbabilisticMatchesDefinition(t *testing.T) {
	const draws = 20000
	for _, tc := range piPairs {
		t.Run(tc.name, func(t *testing.T) {
			ref := map[string]piRef{}
			for _, r := range piReference(tc.a, tc.b, len(tc.a), 3) {
				ref[strings.Join(r.items, ",")] = r
			}
			seen := map[string]int{}
			for seed := range uint64(draws) {
				slots := Probabilistic{}.Interleave(nil, tc.a, tc.b, len(tc.a), seed*0x9e3779b97f4a7c15)
				key := piNames(slots)
				r, ok := ref[key]
				if !ok {
					t.Fatalf("seed %d: list %s is not one the definition can produce", seed, key)
				}
				seen[key]++
				for i, s := range slots {
					if math.Abs(float64(s.PA)-r.pa[i]) > 1e-6 || math.Abs(float64(s.PB)-r.pb[i]) > 1e-6 {
						t.Fatalf("list %s slot %d: PA, PB = %v, %v; want %v, %v", key, i, s.PA, s.PB, r.pa[i], r.pb[i])
					}
				}
			}
			for key, r := range ref {
				got := float64(seen[key]) / draws
				se := math.Sqrt(r.p * (1 - r.p) / draws)
				if math.Abs(got-r.p) > 5*se+1e-9 {
					t.Errorf("list %s: frequency %.4f, want %.4f", key, got, r.p)
				}
			}
		})
	}
}

func piNames(slots []Slot) string {
	s := make([]string, len(slots))
	for i, sl := range slots {
		s[i] = sl.Item
	}
	return strings.Join(s, ",")
}

// piSlots turns a reference list into logged slots.
func piSlots(r piRef) []Slot {
	slots := make([]Slot, len(r.items))
	for i, item := range r.items {
		slots[i] = Slot{Item: item, PA: float32(r.pa[i]), PB: float32(r.pb[i])}
	}
	return slots
}

// TestProbabilisticFidelity checks the fidelity condition of Hofmann,
// Whiteson & de Rijke (TOIS 2013, section 3, condition 1): under clicks
// that do not depend on the items, the expected marginalised outcome E[o]
// = Challenger - Incumbent is zero. By exact enumeration over every list
// the definition produces and every set of clicked slots (each set equally
// likely), and over single clicks on each slot.
func TestProbabilisticFidelity(t *testing.T) {
	for _, tc := range piPairs {
		n := len(tc.a)
		refs := piReference(tc.a, tc.b, n, 3)
		var anySet, single float64
		for _, r := range refs {
			slots := piSlots(r)
			for mask := 1; mask < 1<<n; mask++ {
				var clicks []Click
				for pos := range n {
					if mask&(1<<pos) != 0 {
						clicks = append(clicks, Click{Pos: pos, Weight: 1 + float64(pos)/3})
					}
				}
				s := Probabilistic{}.Credit(slots, clicks)
				anySet += r.p * (s.Challenger - s.Incumbent)
				if len(clicks) == 1 {
					single += r.p * (s.Challenger - s.Incumbent)
				}
			}
		}
		if math.Abs(anySet) > 1e-6 || math.Abs(single) > 1e-6 {
			t.Errorf("%s: expected outcome under random clicks %.3g (click sets), %.3g (single clicks); want 0",
				tc.name, anySet, single)
		}
	}
}

// TestProbabilisticSignIsNotFidelity documents why the credit is reported
// as posterior probabilities rather than a sign: for A = (a,b,c) and B =
// (b,c,a) the expected outcome of a click on the first slot is zero, but
// the sign alone (what Decide keeps) favours the challenger. Derived from
// the definition: the first slot shows a with probability (P_A(a) +
// P_B(a))/2, and only then does the posterior favour the incumbent.
func TestProbabilisticSignIsNotFidelity(t *testing.T) {
	a, b := []string{"a", "b", "c"}, []string{"b", "c", "a"}
	z := 1 + 1.0/8 + 1.0/27
	wantIncumbent := (1/z + 1.0/27/z) / 2 // P(first slot shows a)
	var signC, signI float64
	for _, r := range piReference(a, b, 3, 3) {
		switch Decide(Probabilistic{}.Credit(piSlots(r), []Click{{Pos: 0, Weight: 1}}), true) {
		case ChallengerWin:
			signC += r.p
		case IncumbentWin:
			signI += r.p
		}
	}
	if math.Abs(signI-wantIncumbent) > 1e-6 || math.Abs(signC-(1-wantIncumbent)) > 1e-6 {
		t.Errorf("first-slot click: incumbent wins %.4f, challenger %.4f; want %.4f, %.4f",
			signI, signC, wantIncumbent, 1-wantIncumbent)
	}
}

// TestProbabilisticCredit checks the marginalised credit on hand-worked
// cases.
func TestProbabilisticCredit(t *testing.T) {
	slots := []Slot{
		{Item: "a", Team: Incumbent, PA: 0.75, PB: 0.25},
		{Item: "b", Team: Challenger, PA: 0.5, PB: 0.5},
		{Item: "c", Team: Incumbent, PA: 0.4, PB: 0},
		{Item: "d", Team: Challenger, PA: 0, PB: 0.3},
		{Item: "e", Team: Fixed, PA: 0.5, PB: 0.5},
		{Item: "f", Team: Challenger},
	}
	tests := []struct {
		name   string
		clicks []Click
		want   Score
	}{
		{"no clicks", nil, Score{}},
		// P(slot 0 from B) = 0.25/(0.75+0.25).
		{"one uncertain", []Click{{0, 1}}, Score{Incumbent: 0.75, Challenger: 0.25}},
		// Assignments of slots 0, 1: BB 1/8 (B wins), BA 1/8 and AB 3/8
		// (ties), AA 3/8 (A wins).
		{"two uncertain", []Click{{0, 1}, {1, 1}}, Score{Incumbent: 0.375, Challenger: 0.125}},
		// Slot 2 is certainly A's, slot 3 certainly B's: a tie.
		{"two certain", []Click{{2, 1}, {3, 1}}, Score{}},
		// The purchase (weight 3) on B's certain slot outweighs both others.
		{"weights", []Click{{0, 1}, {1, 1}, {3, 3}}, Score{Challenger: 1}},
		// Repeated clicks on one slot add up before the sum over teams.
		{"repeat", []Click{{1, 1}, {1, 1}, {2, 1}}, Score{Incumbent: 0.5, Challenger: 0.5}},
		{"fixed and outside", []Click{{4, 1}, {9, 1}, {-1, 1}}, Score{}},
		// No logged probabilities: the slot's Team decides.
		{"team fallback", []Click{{5, 1}}, Score{Challenger: 1}},
	}
	for _, tc := range tests {
		got := Probabilistic{}.Credit(slots, tc.clicks)
		if math.Abs(got.Incumbent-tc.want.Incumbent) > 1e-9 || math.Abs(got.Challenger-tc.want.Challenger) > 1e-9 {
			t.Errorf("%s: got %+v, want %+v", tc.name, got, tc.want)
		}
	}
}

// TestProbabilisticCreditManyClicks checks the normal approximation used
// past piExactSlots clicked slots against the exact binomial tail from
// gonum: with k slots each the challenger's with probability q and weight
// 1, the challenger wins when more than k/2 of them are its own.
func TestProbabilisticCreditManyClicks(t *testing.T) {
	const k, q = 30, 0.7
	slots := make([]Slot, k)
	clicks := make([]Click, k)
	for i := range slots {
		slots[i] = Slot{Item: fmt.Sprint(i), PA: 1 - q, PB: q}
		clicks[i] = Click{Pos: i, Weight: 1}
	}
	got := Probabilistic{}.Credit(slots, clicks)
	bin := distuv.Binomial{N: k, P: q}
	want := 1 - bin.CDF(k/2) // P(X >= 16)
	if math.Abs(got.Challenger-want) > 0.02 {
		t.Errorf("challenger posterior %.4f, want about %.4f (binomial tail)", got.Challenger, want)
	}
}

// TestNewProbabilistic checks option validation.
func TestNewProbabilistic(t *testing.T) {
	for _, tau := range []float64{-1, math.Inf(1), math.NaN()} {
		if _, err := NewProbabilistic(tau); !errors.Is(err, ErrBadOption) {
			t.Errorf("tau %v: err %v, want ErrBadOption", tau, err)
		}
	}
	p, err := NewProbabilistic(0)
	if err != nil || p.Tau != 0 {
		t.Errorf("tau 0: %+v, %v; want the default", p, err)
	}
}

// TestProbabilisticLists checks the merged list's shape on uneven,
// overlapping and empty inputs: unique items, the right length, ranks that
// point at the item, and a probability only for lists holding the item.
func TestProbabilisticLists(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 7))
	cases := [][2][]string{
		{piItems(0, 10), piItems(5, 10)},
		{piItems(0, 3), piItems(0, 12)},
		{nil, piItems(0, 4)},
		{piItems(0, 4), nil},
		{nil, nil},
		{{"a", "b", "a", "c"}, {"c", "c", "d"}},
	}
	for range 20 {
		cases = append(cases, [2][]string{piItems(r.IntN(10), r.IntN(15)), piItems(r.IntN(10), r.IntN(15))})
	}
	for _, c := range cases {
		a, b := c[0], c[1]
		for _, n := range []int{0, 1, 5, 40} {
			got := Probabilistic{Tau: 2.5}.Interleave(nil, a, b, n, uint64(n)*31+7)
			piCheckList(t, got, a, b, n, true)
		}
	}
}

// piCheckList checks a merged list's shape and provenance.
func piCheckList(t *testing.T, got []Slot, a, b []string, n int, logsP bool) {
	t.Helper()
	distinct := map[string]bool{}
	for _, s := range append(append([]string(nil), a...), b...) {
		distinct[s] = true
	}
	if want := min(n, len(distinct)); len(got) != want {
		t.Fatalf("a=%v b=%v n=%d: %d slots, want %d", a, b, n, len(got), want)
	}
	seen := map[string]bool{}
	for i, s := range got {
		if seen[s.Item] {
			t.Fatalf("slot %d: %q shown twice", i, s.Item)
		}
		seen[s.Item] = true
		if ra := piFirst(a, s.Item); s.RankA != ra || logsP && (ra == 0) != (s.PA == 0) {
			t.Fatalf("slot %d %q: RankA %d PA %v, want rank %d", i, s.Item, s.RankA, s.PA, ra)
		}
		if rb := piFirst(b, s.Item); s.RankB != rb || logsP && (rb == 0) != (s.PB == 0) {
			t.Fatalf("slot %d %q: RankB %d PB %v, want rank %d", i, s.Item, s.RankB, s.PB, rb)
		}
	}
}

// piFirst is the 1-based rank of s's first occurrence in list, 0 if absent.
func piFirst(list []string, s string) int32 {
	for i, x := range list {
		if x == s {
			return int32(i + 1)
		}
	}
	return 0
}

// TestProbabilisticDeterministic checks that a seed fixes the list.
func TestProbabilisticDeterministic(t *testing.T) {
	a, b := piItems(0, 20), piItems(10, 20)
	differ := false
	for seed := range uint64(50) {
		x := Probabilistic{}.Interleave(nil, a, b, 10, seed)
		y := Probabilistic{}.Interleave(make([]Slot, 3), a, b, 10, seed)
		if piNames(x) != piNames(y) {
			t.Fatalf("seed %d: %s then %s", seed, piNames(x), piNames(y))
		}
		if piNames(x) != piNames(Probabilistic{}.Interleave(nil, a, b, 10, seed+1)) {
			differ = true
		}
	}
	if !differ {
		t.Error("every seed gave the same list")
	}
}

// piItems returns n invented garden-supply identities starting at first.
func piItems(first, n int) []string {
	out := make([]string, n)
	for i := range out {
		out[i] = fmt.Sprintf("bulb-%03d", first+i)
	}
	return out
}

// TestNewRegistersPIAndOI checks that the registry builds both policies
// with their options, and refuses bad ones.
func TestNewRegistersPIAndOI(t *testing.T) {
	p, err := New("probabilistic", Options{Tau: 2})
	if err != nil || p.(Probabilistic).Tau != 2 {
		t.Errorf("probabilistic tau 2: %#v, %v", p, err)
	}
	o, err := New("optimized", Options{Credit: CreditInverseRank})
	if err != nil || !o.(*Optimized).inverse {
		t.Errorf("optimized inverse-rank: %#v, %v", o, err)
	}
	for _, bad := range []Options{{Tau: -2}, {Credit: "log"}} {
		name := "probabilistic"
		if bad.Credit != "" {
			name = "optimized"
		}
		if _, err := New(name, bad); !errors.Is(err, ErrBadOption) {
			t.Errorf("%s %+v: err %v, want ErrBadOption", name, bad, err)
		}
	}
}

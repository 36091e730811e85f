package counterfactual

import (
	"math"
	"slices"
	"strings"
	"testing"

	"riffle/merge"
)

// shown is one list probabilistic interleaving can show, with the team
// assignment that produced it and its probability, and the per-slot draw
// probabilities a sidecar logs.
type shown struct {
	items  []string
	teams  []merge.Team
	pa, pb []float64
	prob   float64
}

// enumerate lists every (list, assignment) that probabilistic interleaving
// of a and b into n slots can produce, with its probability, straight from
// the method's definition (Hofmann, Whiteson & de Rijke, CIKM 2011,
// section 4): while both lists have unplaced items a fair coin picks one,
// which draws an unplaced item with probability proportional to
// rank^-tau; a drawn item leaves both lists. It shares no code with
// package merge or with Weigh.
func enumerate(a, b []string, n int, tau float64) []shown {
	var out []shown
	var rec func(placed map[string]bool, cur shown)
	soft := func(list []string, placed map[string]bool, item string) float64 {
		num, den := 0.0, 0.0
		for i, it := range list {
			if placed[it] {
				continue
			}
			w := math.Pow(float64(i+1), -tau)
			den += w
			if it == item {
				num = w
			}
		}
		if den == 0 {
			return 0
		}
		return num / den
	}
	left := func(list []string, placed map[string]bool) []string {
		var l []string
		for _, it := range list {
			if !placed[it] {
				l = append(l, it)
			}
		}
		return l
	}
	rec = func(placed map[string]bool, cur shown) {
		la, lb := left(a, placed), left(b, placed)
		if len(cur.items) == n || (len(la) == 0 && len(lb) == 0) {
			out = append(out, cur)
			return
		}
		for team, l := range map[merge.Team][]string{merge.Incumbent: la, merge.Challenger: lb} {
			coin := 0.5
			if len(la) == 0 || len(lb) == 0 {
				coin = 1
			}
			src := a
			if team == merge.Challenger {
				src = b
			}
			for _, it := range l {
				p := soft(src, placed, it)
				next := shown{
					items: append(slices.Clone(cur.items), it),
					teams: append(slices.Clone(cur.teams), team),
					pa:    append(slices.Clone(cur.pa), soft(a, placed, it)),
					pb:    append(slices.Clone(cur.pb), soft(b, placed, it)),
					prob:  cur.prob * coin * p,
				}
				np := map[string]bool{it: true}
				for k := range placed {
					np[k] = true
				}
				rec(np, next)
			}
		}
	}
	rec(map[string]bool{}, shown{prob: 1})
	return out
}

// clickSets lists every subset of n positions with its probability under a
// position-based click model: position p is clicked independently with
// probability attract(item) / (p+1).
func clickSets(items []string, attract map[string]float64) (sets [][]int, probs []float64) {
	n := len(items)
	for mask := 0; mask < 1<<n; mask++ {
		p := 1.0
		var set []int
		for i := range n {
			q := attract[items[i]] / float64(i+1)
			if mask&(1<<i) != 0 {
				p *= q
				set = append(set, i)
			} else {
				p *= 1 - q
			}
		}
		sets, probs = append(sets, set), append(probs, p)
	}
	return sets, probs
}

// trueOutcome is the outcome of one impression under the assignment that
// produced it: the sign of the challenger team's click weight minus the
// incumbent team's (CIKM 2011, section 4.1).
func trueOutcome(teams []merge.Team, set []int, weight func(int) float64) float64 {
	d := 0.0
	for _, p := range set {
		if teams[p] == merge.Challenger {
			d += weight(p)
		} else {
			d -= weight(p)
		}
	}
	switch {
	case d > 1e-12:
		return 1
	case d < -1e-12:
		return -1
	}
	return 0
}

// TestUnbiasedByEnumeration checks the importance-sampling identities on
// every list and click set of small cases: the estimator's expectation
// under the logged comparison of A and B equals the true expected outcome
// of the target comparison (A or B against C), computed from the target's
// own enumeration with the real team assignments, and likewise the
// weighted click rate equals the target's click probability (TOIS 2013,
// the importance-sampling estimator is unbiased when the source gives
// every target list a non-zero probability).
func TestUnbiasedByEnumeration(t *testing.T) {
	attract := map[string]float64{"a": 0.9, "b": 0.5, "c": 0.3, "d": 0.7, "e": 0.2}
	split := strings.Split
	cases := []struct {
		name    string
		a, b, c []string
		n       int
		tau     float64
		purch   string // an item whose clicks weigh 3
	}{
		{"rotated", split("a,b,c", ","), split("b,c,a", ","), split("c,a,b", ","), 3, 3, ""},
		{"lengths differ", split("a,b", ","), split("c,d,a", ","), split("d,a,c,b", ","), 3, 3, ""},
		{"truncated", split("a,b,c,d", ","), split("d,c,b,a", ","), split("b,a,d,c", ","), 2, 3, ""},
		{"tau 1, weighted", split("a,b,c", ","), split("c,d,e", ","), split("e,a,d", ","), 3, 1, "d"},
		{"one list runs out", split("a", ","), split("b,c,a", ","), split("c,b", ","), 3, 3, ""},
		{"candidate is B", split("a,b,c", ","), split("b,a,d", ","), split("b,a,d", ","), 3, 3, ""},
	}
	for _, tc := range cases {
		for _, against := range []merge.Team{merge.Incumbent, merge.Challenger} {
			x := tc.a
			if against == merge.Challenger {
				x = tc.b
			}
			weight := func(items []string) func(int) float64 {
				return func(p int) float64 {
					if items[p] == tc.purch {
						return 3
					}
					return 1
				}
			}
			var wantO, wantC float64
			for _, s := range enumerate(x, tc.c, tc.n, tc.tau) {
				sets, probs := clickSets(s.items, attract)
				for k, set := range sets {
					wantO += s.prob * probs[k] * trueOutcome(s.teams, set, weight(s.items))
					if len(set) > 0 {
						wantC += s.prob * probs[k]
					}
				}
			}
			var gotO, gotC float64
			for _, s := range enumerate(tc.a, tc.b, tc.n, tc.tau) {
				sets, probs := clickSets(s.items, attract)
				for k, set := range sets {
					l := logged(tc.a, tc.b, s, set, weight(s.items))
					term, err := Weigh(l, against, tc.c, tc.tau)
					if err != nil {
						t.Fatalf("%s: %v", tc.name, err)
					}
					gotO += s.prob * probs[k] * term.Weight * term.Outcome
					if term.Clicked {
						gotC += s.prob * probs[k] * term.Weight
					}
				}
			}
			if math.Abs(gotO-wantO) > 1e-6 || math.Abs(gotC-wantC) > 1e-6 {
				t.Errorf("%s against %v: E_S[w o] = %.9f, E_S[w 1{click}] = %.9f; want E_T[o] = %.9f, P_T(click) = %.9f",
					tc.name, against, gotO, gotC, wantO, wantC)
			}
		}
	}
}

// logged builds the impression a sidecar logs for one enumerated list.
func logged(a, b []string, s shown, set []int, weight func(int) float64) *Logged {
	l := &Logged{Lengths: [2]int{len(a), len(b)}}
	for i, it := range s.items {
		l.Slots = append(l.Slots, merge.Slot{Item: it, Team: s.teams[i],
			RankA: int32(slices.Index(a, it) + 1), RankB: int32(slices.Index(b, it) + 1),
			PA: float32(s.pa[i]), PB: float32(s.pb[i])})
	}
	for _, p := range set {
		l.Clicks = append(l.Clicks, merge.Click{Pos: p, Weight: weight(p)})
	}
	return l
}

// TestLoggedProbabilitiesMatch checks that the per-slot probabilities the
// live policy logs are the ones the enumeration derives for the same list,
// so the estimator reads the log as it was written.
func TestLoggedProbabilitiesMatch(t *testing.T) {
	a, b := strings.Split("a,b,c,d", ","), strings.Split("c,e,a", ",")
	byList := map[string]shown{}
	for _, s := range enumerate(a, b, 4, 3) {
		byList[strings.Join(s.items, ",")] = s
	}
	var p merge.Probabilistic
	for seed := range uint64(300) {
		slots := p.Interleave(nil, a, b, 4, seed)
		var items []string
		for _, s := range slots {
			items = append(items, s.Item)
		}
		want, ok := byList[strings.Join(items, ",")]
		if !ok {
			t.Fatalf("seed %d: list %v is not among the enumerated ones", seed, items)
		}
		for i, s := range slots {
			if math.Abs(float64(s.PA)-want.pa[i]) > 1e-6 || math.Abs(float64(s.PB)-want.pb[i]) > 1e-6 {
				t.Fatalf("seed %d slot %d: logged (%v, %v), enumerated (%v, %v)", seed, i+1, s.PA, s.PB, want.pa[i], want.pb[i])
			}
		}
	}
}

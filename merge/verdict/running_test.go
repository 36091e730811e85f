package verdict

import (
	"math"
	"math/rand/v2"
	"testing"
	"time"
)

// looks computes the status after each of the given outcome counts in
// turn, carrying the running state from one look to the next.
func looks(t *testing.T, p Params, counts ...[4]int64) []Status {
	t.Helper()
	var run Running
	var out []Status
	at := time.Date(2026, 4, 1, 9, 0, 0, 0, time.UTC)
	for i, o := range counts {
		s, err := Compute(Input{Outcomes: o, Params: p, Running: run, Now: at.Add(time.Duration(i) * time.Minute), ConfigHash: "cafe"})
		if err != nil {
			t.Fatal(err)
		}
		run = s.Running
		out = append(out, s)
	}
	return out
}

// The audit's first repro: a verdict reached must not revert when ten
// more incumbent wins arrive. Under the old rule (1144, 1000) was
// challenger-better and (1144, 1010) undecided. The new test needs more
// wins to decide at all, so the first decided count from 1144 up is used.
func TestDecisionStaysWhenTheLeadShrinks(t *testing.T) {
	w := int64(1144)
	for ; ; w++ {
		s, err := Compute(Input{Outcomes: outcomes(0, 1000, w, 0)})
		if err != nil {
			t.Fatal(err)
		}
		if s.Verdict == ChallengerBetter {
			break
		}
	}
	t.Logf("first decided at %d challenger wins against 1000", w)
	ss := looks(t, Params{}, outcomes(0, 1000, w, 0), outcomes(0, 1010, w, 0), outcomes(0, 1100, w, 0))
	first := ss[0]
	for i, s := range ss {
		if s.Verdict != ChallengerBetter || s.Decided == nil || *s.Decided != *first.Decided {
			t.Errorf("look %d (%v): verdict %s decided %+v, want the first decision %+v kept", i, s.Wins, s.Verdict, s.Decided, first.Decided)
		}
		if s.PValue > first.PValue || s.CSDelta[0] < first.CSDelta[0] || s.CSDelta[1] > first.CSDelta[1] {
			t.Errorf("look %d: p %v interval %v, want p <= %v and inside %v", i, s.PValue, s.CSDelta, first.PValue, first.CSDelta)
		}
	}
	// Without the running state the last look alone would not decide:
	// the state is what keeps the verdict.
	alone, _ := Compute(Input{Outcomes: outcomes(0, 1100, w, 0)})
	if alone.Verdict != Undecided {
		t.Errorf("(%d, 1100) alone: %s, want undecided (else this test shows nothing)", w, alone.Verdict)
	}
	d := first.Decided
	if d.WithFeedback != w+1000 || d.ConfigHash != "cafe" || d.PValue > 0.05 || d.CSDelta[0] <= 0 || !d.Time.Equal(time.Date(2026, 4, 1, 9, 0, 0, 0, time.UTC)) {
		t.Errorf("decision %+v: want the first look's evidence, time and config hash", d)
	}
}

// The audit's second repro: win share 0.515, margin 0.02. The old rule
// said challenger-better at 50,000 impressions and on-par at 100,000.
func TestNoSwingBetweenAheadAndOnPar(t *testing.T) {
	rng := rand.New(rand.NewPCG(15, 2))
	var w, l int64
	var counts [][4]int64
	for i := 1; i <= 200000; i++ {
		if rng.Float64() < 0.515 {
			w++
		} else {
			l++
		}
		if i%2000 == 0 {
			counts = append(counts, outcomes(0, l, w, 0))
		}
	}
	ss := looks(t, Params{Margin: 0.02}, counts...)
	var first Verdict = Undecided
	for i, s := range ss {
		if first == Undecided {
			first = s.Verdict
		} else if s.Verdict != first {
			t.Fatalf("look %d (n %d): verdict %s after %s", i, s.WithFeedback, s.Verdict, first)
		}
	}
	last := ss[len(ss)-1]
	if first != ChallengerBetter || last.Current.Verdict != ChallengerBetter {
		t.Errorf("verdict %s, current %s: want challenger-better, decided before on-par could be", first, last.Current.Verdict)
	}
	if last.CSDelta[1] >= 0.02 {
		t.Logf("running interval %v not yet inside the margin", last.CSDelta)
	}
}

// The audit's third repro: one user with 40 wins and 10 losses proves
// nothing about users in general. The old rule said challenger-better
// (p = 0.0031) at MDE 0.1.
func TestOneUserDecidesNothing(t *testing.T) {
	o := outcomes(0, 10, 40, 0)
	s, err := Compute(Input{Outcomes: o, Users: map[uint64][4]int64{7: o}, Params: Params{MDE: 0.1}})
	if err != nil {
		t.Fatal(err)
	}
	if s.Verdict != Undecided || s.PValue < 0.5 {
		t.Errorf("verdict %s p %v: want undecided with no evidence", s.Verdict, s.PValue)
	}
	if s.DesignEffect != 50 {
		t.Errorf("design effect %v with one user of 50: want the bound 50 (sum n^2 / n)", s.DesignEffect)
	}
	if s.SignTest.PValue != 1 || s.SignTest.Challenger != 1 || s.SignTest.Unit != "users" {
		t.Errorf("sign test %+v: want one user, p 1", s.SignTest)
	}
}

// Five users who each chose the challenger 100 times still decide
// nothing at alpha 0.05: E < exp(k/2) with k users, below 1/alpha = 20
// for k <= 5.
func TestFiveUsersDecideNothing(t *testing.T) {
	users := map[uint64][4]int64{}
	for u := uint64(1); u <= 5; u++ {
		users[u] = outcomes(0, 0, 100, 0)
	}
	s, err := Compute(Input{Outcomes: outcomes(0, 0, 500, 0), Users: users, Params: Params{MDE: 0.3}})
	if err != nil {
		t.Fatal(err)
	}
	if s.Verdict != Undecided || s.PValue <= math.Exp(-2.5) {
		t.Errorf("verdict %s p %v: want undecided with p above exp(-5/2)", s.Verdict, s.PValue)
	}
}

// The design effect is never 0: not with one user, nor with users who
// happen to share one win share.
func TestDesignEffectNeverZero(t *testing.T) {
	cases := map[string]map[uint64][4]int64{
		"one user":       {1: outcomes(0, 3, 3, 0)},
		"same share":     {1: outcomes(0, 1, 1, 0), 2: outcomes(0, 2, 2, 0)},
		"one impression": {1: outcomes(0, 0, 1, 0)},
	}
	for name, users := range cases {
		var tot [4]int64
		for _, c := range users {
			for i := range c {
				tot[i] += c[i]
			}
		}
		s, err := Compute(Input{Outcomes: tot, Users: users})
		if err != nil {
			t.Fatal(err)
		}
		if s.DesignEffect < 1 {
			t.Errorf("%s: design effect %v, want >= 1", name, s.DesignEffect)
		}
	}
}

// The reported p-value is the smallest alpha at which the interval
// excludes 0, at every look: p <= alpha exactly when the interval
// excludes 0, for the running values and for the look alone.
func TestPValueMatchesInterval(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for run := range 40 {
		share := 0.44 + 0.12*rng.Float64()
		users := map[uint64][4]int64{}
		var tot [4]int64
		var counts [][4]int64
		var maps []map[uint64][4]int64
		for i := range 3000 {
			o := 1 + rng.IntN(2)
			switch r := rng.Float64(); {
			case r < 0.2:
				o = 3
			case r < 0.2+0.8*share:
				o = 2
			default:
				o = 1
			}
			u := uint64(1 + rng.IntN(60+run*10))
			c := users[u]
			c[o]++
			users[u] = c
			tot[o]++
			if i%100 == 99 {
				counts = append(counts, tot)
				cp := make(map[uint64][4]int64, len(users))
				for k, v := range users {
					cp[k] = v
				}
				maps = append(maps, cp)
			}
		}
		var runState Running
		for i, o := range counts {
			s, err := Compute(Input{Outcomes: o, Users: maps[i], Running: runState})
			if err != nil {
				t.Fatal(err)
			}
			runState = s.Running
			for name, ev := range map[string]struct {
				p  float64
				iv Interval
			}{"running": {s.PValue, s.CSDelta}, "current": {s.Current.PValue, s.Current.CSDelta}} {
				if excl := ev.iv[0] > 0 || ev.iv[1] < 0; excl != (ev.p <= 0.05) {
					t.Fatalf("run %d look %d %s: p %v, interval %v at alpha 0.05", run, i, name, ev.p, ev.iv)
				}
			}
			// The same sequence at other levels: p is the smallest alpha
			// at which it excludes 1/2.
			cl, _ := cluster(o, maps[i])
			mix, _ := planMixture(0.05, 0.8, 0.02)
			lk := look{mix: mix, byUser: cl.byUser, naive: cl.single}
			p := lk.pValue()
			for _, a := range []float64{p * 0.999, p * 1.001, 0.01, 0.2} {
				if a >= 1 {
					continue
				}
				iv := lk.interval(a)
				if excl := iv[0] > 0.5 || iv[1] < 0.5; excl != (p <= a) {
					t.Fatalf("run %d look %d: p %v, interval %v at alpha %v", run, i, p, iv, a)
				}
			}
		}
	}
}

// All ties: neither interval collapses to [0, 0].
func TestAllTiesNotDegenerate(t *testing.T) {
	for _, n := range []int64{1, 2, 10, 1000} {
		s, err := Compute(Input{Outcomes: outcomes(0, 0, 0, n)})
		if err != nil {
			t.Fatal(err)
		}
		for name, iv := range map[string]Interval{"ci": s.CI, "cs_delta": s.CSDelta} {
			if !(iv[0] < 0 && iv[1] > 0) {
				t.Errorf("%d ties: %s %v, want 0 strictly inside", n, name, iv)
			}
		}
		if s.Verdict != Undecided {
			t.Errorf("%d ties: verdict %s without a margin, want undecided", n, s.Verdict)
		}
	}
}

// A change of alpha starts the running interval afresh but keeps the
// decision.
func TestRunningRestartsOnNewSettings(t *testing.T) {
	ss := looks(t, Params{}, outcomes(0, 4000, 6000, 0))
	s, err := Compute(Input{Outcomes: outcomes(0, 4000, 6000, 0), Running: ss[0].Running, Params: Params{Alpha: 0.01}})
	if err != nil {
		t.Fatal(err)
	}
	if s.Running.Looks != 1 || s.Running.Alpha != 0.01 || s.Decided == nil || *s.Decided != *ss[0].Decided {
		t.Errorf("running %+v: want one look at alpha 0.01 and the decision kept", s.Running)
	}
	if _, err := Compute(Input{Running: Running{Looks: 1, CSDelta: Interval{0.3, 0.1}}}); err == nil {
		t.Error("a running interval with lo > hi: want an error")
	}
}

// The mixture's rho is the one Howard et al. (2021, section 3.5) give
// for the tightest boundary at V = v; check by minimising the boundary
// over rho numerically.
func TestNormalMixtureTightestAtPlannedVariance(t *testing.T) {
	const alpha, v = 0.05, 1200.0
	width := func(rho2 float64) float64 { // S at which log E reaches log(1/alpha), V = v
		u := rho2 * v
		return math.Sqrt(2 * (1 + u) / rho2 * (math.Log(1/alpha) + math.Log1p(u)/2))
	}
	got := normalMixtureFor(alpha, v).rho2
	best, bestW := 0.0, math.Inf(1)
	for r := got / 4; r < got*4; r *= 1.001 {
		if w := width(r); w < bestW {
			best, bestW = r, w
		}
	}
	if math.Abs(best-got)/got > 0.05 {
		t.Errorf("rho2 %v, numerical optimum %v", got, best)
	}
}

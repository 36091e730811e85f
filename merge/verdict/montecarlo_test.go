package verdict

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// stream is a look's sums kept up to date one impression at a time, as
// the store's per-user counts are, so that a look after every impression
// costs O(1).
type stream struct {
	look
	users []struct{ n, y2 float64 }
	w, l  float64
}

func newStream(mix normalMixture, users int) *stream {
	return &stream{look: look{mix: mix}, users: make([]struct{ n, y2 float64 }, users)}
}

// add folds in user u's impression with doubled score s2 (0 loss, 1 tie,
// 2 win); u < 0 is an impression without a user key, a user of its own.
func (s *stream) add(u int, s2 float64) {
	var us struct{ n, y2 float64 }
	if u >= 0 {
		us = s.users[u]
	}
	m := &s.byUser
	if us.n == 0 {
		m.k++
	}
	ny, nn := us.y2+s2, us.n+1
	m.aa += ny*ny - us.y2*us.y2
	m.an += ny*nn - us.y2*us.n
	m.nn += nn*nn - us.n*us.n
	m.n++
	m.y2 += s2
	if u >= 0 {
		s.users[u] = struct{ n, y2 float64 }{nn, ny}
	}
	switch s2 {
	case 0:
		s.naive.addSingletons(0, 1, 0)
		s.l++
	case 1:
		s.naive.addSingletons(0, 0, 1)
	default:
		s.naive.addSingletons(1, 0, 0)
		s.w++
	}
}

// rejects reports whether this look's sequence excludes Delta = 0 at
// alpha; E(1/2) below 1/alpha means 1/2 is inside, which is cheap to see.
func (s *stream) rejects(alpha float64) bool {
	return s.logE(0.5) >= math.Log(1/alpha) && s.pValue() <= alpha
}

// oldRejects is the previous rule: the Beta-mixture test on counts over
// the design effect (floored at 1), p < alpha.
func (s *stream) oldRejects(old Mixture, alpha float64) bool {
	deff := 1.0
	if nv := s.naive.variance(); nv > 0 {
		deff = max(1, s.byUser.variance()/nv)
	}
	p, _ := old.PValue(s.w/deff, s.l/deff)
	return p < alpha
}

type impression struct {
	user int
	s2   float64
}

// nullRun draws one experiment under no difference: users of 1-50
// impressions, each with a win probability from Beta(a, a), arriving in
// contiguous blocks or in sessions of 1-10 impressions shuffled together.
func nullRun(rng *rand.Rand, users int, a float64, sessions bool) []impression {
	beta := distuv.Beta{Alpha: a, Beta: a, Src: rng}
	var parts [][]impression
	for u := range users {
		p := beta.Rand()
		n := 1 + rng.IntN(50)
		var cur []impression
		size := 1 + rng.IntN(10)
		for range n {
			s2 := 0.0
			if rng.Float64() < p {
				s2 = 2
			}
			cur = append(cur, impression{u, s2})
			if sessions && len(cur) == size {
				parts, cur, size = append(parts, cur), nil, 1+rng.IntN(10)
			}
		}
		if len(cur) > 0 {
			parts = append(parts, cur)
		}
	}
	if sessions {
		rng.Shuffle(len(parts), func(i, j int) { parts[i], parts[j] = parts[j], parts[i] })
	}
	return slices.Concat(parts...)
}

// Under no difference, with a look after every impression, the always-
// valid test's false positive rate stays at or below alpha + 3 standard
// errors in every cell of the audit's scenarios, where the previous rule
// reached 0.37-0.57.
func TestMonteCarloFalsePositivesUnderClustering(t *testing.T) {
	if testing.Short() {
		t.Skip("Monte Carlo: skipped under -short")
	}
	const alpha, runs, users = 0.05, 1000, 300
	rng := rand.New(rand.NewPCG(2021, 11))
	limit := alpha + 3*math.Sqrt(alpha*(1-alpha)/runs)
	for _, sessions := range []bool{false, true} {
		for _, a := range []float64{1, 10} {
			for _, mde := range []float64{0.02, 0.1, 0.3} {
				mix, err := planMixture(alpha, 0.8, mde)
				if err != nil {
					t.Fatal(err)
				}
				old := MixtureForMDE(mde)
				var fp, oldFP int
				var usersAt []float64
				for range runs {
					s := newStream(mix, users)
					newDone, oldDone := false, false
					for _, im := range nullRun(rng, users, a, sessions) {
						s.add(im.user, im.s2)
						if !newDone && s.rejects(alpha) {
							newDone = true
							fp++
							usersAt = append(usersAt, s.byUser.k)
						}
						if !oldDone && s.oldRejects(old, alpha) {
							oldDone = true
							oldFP++
						}
						if newDone && oldDone {
							break
						}
					}
				}
				rate := float64(fp) / runs
				arrival := "blocks"
				if sessions {
					arrival = "sessions"
				}
				t.Logf("%-8s Beta(%2.0f,%2.0f) MDE %.2f: false positive rate %.3f (previous rule %.3f); median users at a false rejection %v",
					arrival, a, a, mde, rate, float64(oldFP)/runs, median(usersAt))
				if rate > limit {
					t.Errorf("%s Beta(%v) MDE %v: false positive rate %.3f above %.3f", arrival, a, mde, rate, limit)
				}
			}
		}
	}
}

// Under a true preference (win share 0.53 of decisive impressions, 20%
// ties, so Delta = 0.024), no run changes its verdict once it has left
// undecided, with the store's looks (Compute after every finalised batch
// of 250) with and without a margin; and the decision's expected sample
// size with a look after every impression is reported against the
// fixed-horizon size and the previous rule's.
func TestMonteCarloVerdictsHoldUnderPreference(t *testing.T) {
	if testing.Short() {
		t.Skip("Monte Carlo: skipped under -short")
	}
	const alpha, runs, horizon, batch = 0.05, 200, 40000, 250
	rng := rand.New(rand.NewPCG(2021, 53))
	mix, _ := planMixture(alpha, 0.8, 0.02)
	old := MixtureForMDE(0.02)
	var sizes, oldSizes []float64
	var oldFlips, oldReverted, changed int
	for range runs {
		s := newStream(mix, 0)
		var o [4]int64
		runs := map[float64]*Running{0: {}, 0.02: {}}
		first := map[float64]Verdict{0: Undecided, 0.02: Undecided}
		decidedAt, oldAt := float64(horizon), float64(horizon)
		oldV, oldChanges, oldShown := Undecided, 0, false
		for i := 1; i <= horizon; i++ {
			s2 := 1.0
			if r := rng.Float64(); r >= 0.2 {
				s2 = 0
				if rng.Float64() < 0.53 {
					s2 = 2
				}
			}
			s.add(-1, s2)
			o[[]int{1, 3, 2}[int(s2)]]++
			if decidedAt == horizon && s.rejects(alpha) {
				decidedAt = float64(i)
			}
			v := Undecided
			if s.oldRejects(old, alpha) {
				v = ChallengerBetter
				if s.l > s.w {
					v = IncumbentBetter
				}
				oldAt = min(oldAt, float64(i))
				oldShown = oldShown || v == ChallengerBetter
			}
			if v != oldV {
				oldChanges++
				oldV = v
			}
			if i%batch != 0 {
				continue
			}
			for m, run := range runs {
				st, err := Compute(Input{Outcomes: o, Params: Params{Margin: m}, Running: *run})
				if err != nil {
					t.Fatal(err)
				}
				*run = st.Running
				if first[m] == Undecided {
					first[m] = st.Verdict
				} else if st.Verdict != first[m] {
					changed++
				}
			}
		}
		if oldChanges > 1 {
			oldFlips++
		}
		if oldShown && oldV == Undecided {
			oldReverted++
		}
		sizes, oldSizes = append(sizes, decidedAt), append(oldSizes, oldAt)
	}
	if changed > 0 {
		t.Errorf("%d looks changed a verdict after it had left undecided", changed)
	}
	differ := 0
	for i := range sizes {
		if sizes[i] != oldSizes[i] {
			differ++
		}
	}
	fixed, _ := SampleSize(alpha, 0.8, 0.024)
	// The fixed-horizon size with the ties' lower variance: score variance
	// 0.25 - 0.2/4 under no difference, R(1-R) - 0.2/4 at R = 0.524.
	za, zb := zTwoSided(alpha), distuv.UnitNormal.Quantile(0.8)
	root := za*math.Sqrt(0.2) + zb*math.Sqrt(0.524*0.476-0.05)
	fixedTies := CeilCount(root * root / (0.024 * 0.024))
	planned, _ := SequentialSampleSize(alpha, 0.8, 0.024)
	t.Logf("Delta 0.024 (win share 0.53, 20%% ties), %d runs, looks after every impression, horizon %d:", runs, horizon)
	t.Logf("  new rule: decided by the horizon in %.3f of runs; sample size at the decision mean %.0f, median %.0f (censored at the horizon)",
		share(sizes, horizon), mean(sizes), median(sizes))
	t.Logf("  previous rule: first significant in %.3f of runs, mean %.0f, median %.0f; verdict changed more than once in %.3f of runs, ended undecided after showing challenger-better in %.3f",
		share(oldSizes, horizon), mean(oldSizes), median(oldSizes), float64(oldFlips)/runs, float64(oldReverted)/runs)
	t.Logf("  the two rules first rejected at different impressions in %d runs", differ)
	t.Logf("  fixed-horizon size for Delta 0.024 at power 0.8: %d with 20%% ties, %d assuming none; the plan's always-valid size (no ties): %d", fixedTies, fixed, planned)
}

func share(xs []float64, horizon float64) float64 {
	n := 0
	for _, x := range xs {
		if x < horizon {
			n++
		}
	}
	return float64(n) / float64(len(xs))
}

func mean(xs []float64) float64 {
	var s float64
	for _, x := range xs {
		s += x
	}
	return s / float64(len(xs))
}

func median(xs []float64) float64 {
	if len(xs) == 0 {
		return math.NaN()
	}
	slices.Sort(xs)
	return xs[len(xs)/2]
}

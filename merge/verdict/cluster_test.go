package verdict

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"riffle/merge"
)

// population draws k users of m impressions each. Every impression copies
// its user's own outcome with probability copy and is otherwise drawn
// afresh, with P(challenger) = P(incumbent) = 0.4, P(tie) = 0.2; the
// intra-user correlation of outcomes is then copy^2.
func population(r *rand.Rand, k, m int, copy float64) ([4]int64, map[uint64][4]int64) {
	draw := func() merge.Outcome {
		switch u := r.Float64(); {
		case u < 0.4:
			return merge.ChallengerWin
		case u < 0.8:
			return merge.IncumbentWin
		}
		return merge.Tie
	}
	var total [4]int64
	users := make(map[uint64][4]int64, k)
	for u := range k {
		own := draw()
		var c [4]int64
		for range m {
			o := own
			if r.Float64() >= copy {
				o = draw()
			}
			c[o]++
			total[o]++
		}
		users[uint64(u+1)] = c
	}
	return total, users
}

// Kish (Survey Sampling, 1965, section 5.4): for clusters of equal size m
// with intra-cluster correlation rho the design effect is 1 + (m-1) rho.
func TestDesignEffectKish(t *testing.T) {
	cases := []struct {
		name     string
		k, m     int
		copy     float64
		tolerate float64 // relative
	}{
		{"independent users", 3000, 10, 0, 0.1},
		{"identical outcomes per user", 600, 20, 1, 0.1},
		{"correlation 0.25", 2000, 10, 0.5, 0.15},
		{"correlation 0.49", 2000, 5, 0.7, 0.15},
	}
	r := rand.New(rand.NewPCG(3, 5))
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			total, users := population(r, c.k, c.m, c.copy)
			cl, err := cluster(total, users)
			if err != nil {
				t.Fatal(err)
			}
			got := cl.designEffect()
			want := 1 + float64(c.m-1)*c.copy*c.copy
			t.Logf("design effect %.3f, Kish %.3f", got, want)
			if math.Abs(got-want) > c.tolerate*want {
				t.Errorf("design effect %.3f, want %.3f +/- %.0f%% (Kish 1 + (m-1) rho)", got, want, 100*c.tolerate)
			}
			if cl.users != int64(c.k) {
				t.Errorf("users = %d, want %d", cl.users, c.k)
			}
		})
	}
}

// The delta-method variance against a seeded cluster bootstrap over users
// (Efron & Tibshirani, An Introduction to the Bootstrap, 1993, resampling
// whole clusters): 2000 resamples give the variance to about 3%, so 15%
// is a generous bound.
func TestClusteredVarianceAgainstBootstrap(t *testing.T) {
	r := rand.New(rand.NewPCG(17, 19))
	type user struct{ y, n float64 }
	var list []user
	var total [4]int64
	users := map[uint64][4]int64{}
	for u := range 400 {
		lean := r.Float64() // the user's own preference
		var c [4]int64
		for range 1 + r.IntN(25) {
			o := merge.IncumbentWin
			switch x := r.Float64(); {
			case x < 0.15:
				o = merge.Tie
			case x < 0.15+0.85*lean:
				o = merge.ChallengerWin
			}
			c[o]++
			total[o]++
		}
		users[uint64(u+1)] = c
		list = append(list, user{float64(c[merge.ChallengerWin]) + float64(c[merge.Tie])/2, float64(c[1] + c[2] + c[3])})
	}
	cl, err := cluster(total, users)
	if err != nil {
		t.Fatal(err)
	}
	const resamples = 2000
	var sum, sumSq float64
	for range resamples {
		var y, n float64
		for range list {
			u := list[r.IntN(len(list))]
			y += u.y
			n += u.n
		}
		sum += y / n
		sumSq += (y / n) * (y / n)
	}
	mean := sum / resamples
	boot := sumSq/resamples - mean*mean
	t.Logf("delta method %.4g, bootstrap %.4g, design effect %.2f", cl.clustered, boot, cl.designEffect())
	if math.Abs(cl.clustered-boot) > 0.15*boot {
		t.Errorf("delta-method variance %.3g, cluster bootstrap %.3g: differ by more than 15%%", cl.clustered, boot)
	}
	if cl.designEffect() < 2 {
		t.Errorf("design effect %.2f for users with their own leanings, want well above 1", cl.designEffect())
	}
}

// One impression per user, user key 0 and counts missing from the
// per-user map are all singletons, whose clustered variance is the naive
// one exactly.
func TestClusterSingletons(t *testing.T) {
	total := [4]int64{9, 30, 40, 12}
	cases := []struct {
		name  string
		users map[uint64][4]int64
	}{
		{"no per-user counts", nil},
		{"all under user key 0", map[uint64][4]int64{0: total}},
		{"one impression per user", func() map[uint64][4]int64 {
			m := map[uint64][4]int64{}
			id := uint64(1)
			for o := 1; o < 4; o++ {
				for range total[o] {
					var c [4]int64
					c[o] = 1
					m[id] = c
					id++
				}
			}
			return m
		}()},
	}
	for _, c := range cases {
		cl, err := cluster(total, c.users)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(cl.designEffect()-1) > 1e-12 || cl.users != 82 {
			t.Errorf("%s: design effect %v users %d, want 1 and 82", c.name, cl.designEffect(), cl.users)
		}
	}
}

func TestClusterBadInput(t *testing.T) {
	total := [4]int64{0, 5, 5, 0}
	for name, users := range map[string]map[uint64][4]int64{
		"more than the totals": {1: {0, 6, 0, 0}},
		"negative":             {1: {0, -1, 0, 0}},
	} {
		if _, err := cluster(total, users); !errors.Is(err, ErrInput) {
			t.Errorf("%s: error = %v, want ErrInput", name, err)
		}
	}
}

package verdict

import (
	"math"
	"testing"
)

// The fixed-sample interval for Delta keeps its nominal coverage 1 - alpha
// to within 2 points from below for n >= 10, by exact enumeration of the
// trinomial (wins, losses, ties) on a grid of win shares (of decisive
// impressions) and tie shares. Over-coverage is allowed: with n = 10 the
// lattice of outcomes makes exact coverage impossible.
func TestPreferenceIntervalCoverage(t *testing.T) {
	const alpha = 0.05
	z := zTwoSided(alpha)
	for _, n := range []int{10, 15, 20, 30, 50} {
		ivs := map[[2]int]Interval{}
		for w := 0; w <= n; w++ {
			for l := 0; l+w <= n; l++ {
				ivs[[2]int{w, l}] = preferenceInterval(float64(w), float64(l), float64(n-w-l), 1, z)
			}
		}
		least, most := 1.0, 0.0
		for _, q := range []float64{0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9} {
			for _, tie := range []float64{0, 0.2, 0.4, 0.6, 0.8} {
				pw, pl := (1-tie)*q, (1-tie)*(1-q)
				r := pw + tie/2
				cover := 0.0
				for k, iv := range ivs {
					w, l := k[0], k[1]
					if iv.Contains(r) {
						cover += trinomial(n, w, l, pw, pl, tie)
					}
				}
				least, most = min(least, cover), max(most, cover)
				if cover < 1-alpha-0.02 {
					t.Errorf("n %d win share %v tie share %v: coverage %.4f, want >= %.2f", n, q, tie, cover, 1-alpha-0.02)
				}
			}
		}
		t.Logf("n %d: coverage from %.4f to %.4f", n, least, most)
	}
}

// trinomial is the probability of w wins, l losses and n-w-l ties.
func trinomial(n, w, l int, pw, pl, pt float64) float64 {
	tie := n - w - l
	lg := func(k int) float64 { v, _ := math.Lgamma(float64(k) + 1); return v }
	term := func(k int, p float64) float64 {
		if k == 0 {
			return 0
		}
		if p == 0 {
			return math.Inf(-1)
		}
		return float64(k) * math.Log(p)
	}
	return math.Exp(lg(n) - lg(w) - lg(l) - lg(tie) + term(w, pw) + term(l, pl) + term(tie, pt))
}

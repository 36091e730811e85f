package verdict

import (
	"math"
	"testing"

	"riffle/merge"
)

// Hand-worked cases: every expected number below is derived on paper in
// the comments, from the published definitions, not taken from the code's
// output. alphaZ2 is the two-sided level whose critical value is exactly
// z = 2 (P(|Z| > 2) = erfc(2/sqrt 2)), so that z^2 = 4 keeps the
// arithmetic exact.
var alphaZ2 = math.Erfc(math.Sqrt2)

// wlt returns Input.Outcomes for w challenger wins, l incumbent wins and
// t ties.
func wlt(w, l, t int64) [4]int64 {
	var o [4]int64
	o[merge.ChallengerWin], o[merge.IncumbentWin], o[merge.Tie] = w, l, t
	return o
}

// TestDeltaIntervalWithTiesByHand: W = 6, L = 2, T = 2 from ten
// independent impressions. The preference share is R = (W + T/2)/n = 0.7
// and the tie share t = 0.2. The per-impression score (1 win, 1/2 tie, 0
// loss) has variance r(1-r) - t/4 under share r (E[s^2] = r - t/4), so
// the score interval (Wilson 1927, with this variance) is the set of r
// with (R - r)^2 <= (z^2/n)(r(1-r) - t/4). With z^2/n = 0.4:
//
//	0.49 - 1.4r + r^2 = 0.4r - 0.4r^2 - 0.02
//	1.4r^2 - 1.8r + 0.51 = 0
//	r = (1.8 -+ sqrt(3.24 - 2.856)) / 2.8 = (1.8 -+ sqrt(0.384)) / 2.8
//	  = 0.421543809, 0.864170477
//
// so Delta = R - 1/2 has CI [-0.078456191, 0.364170477]. Ignoring the tie
// term (-t/4) would give r = (1.8 - sqrt(0.496))/2.8 = 0.391331 at the
// lower end instead.
func TestDeltaIntervalWithTiesByHand(t *testing.T) {
	s, err := Compute(Input{Outcomes: wlt(6, 2, 2), Params: Params{Alpha: alphaZ2}})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(s.Delta-0.2) > 1e-12 || s.DesignEffect != 1 {
		t.Fatalf("Delta %v, design effect %v; want 0.2 and 1 (no users given: all independent)", s.Delta, s.DesignEffect)
	}
	want := Interval{(1.8-math.Sqrt(0.384))/2.8 - 0.5, (1.8+math.Sqrt(0.384))/2.8 - 0.5}
	for i, w := range []float64{-0.078456191, 0.364170477} {
		if math.Abs(want[i]-w) > 1e-9 {
			t.Fatalf("the closed form %v disagrees with the hand value %v", want[i], w)
		}
	}
	// Since the continuity correction of 1/(4n) and the tie share
	// estimated under each r (merge/verdict/wilson.go), CI is the hand
	// interval widened by at most 1/n at each end, never narrower.
	if !widens(s.CI, want, 1/10.0) {
		t.Errorf("CI = %v, want %v widened by at most 1/n", s.CI, want)
	}
}

// fourUsers has two impressions from each of four users:
//
//	user  W L T   n_u  y_u = W + T/2
//	1     2 0 0   2    2
//	2     0 2 0   2    0
//	3     1 0 1   2    1.5
//	4     0 1 1   2    0.5
//
// so W = 3, L = 3, T = 2, n = 8, R = 4/8 = 1/2, t = 1/4.
func fourUsers() ([4]int64, map[uint64][4]int64) {
	return wlt(3, 3, 2), map[uint64][4]int64{
		1: wlt(2, 0, 0), 2: wlt(0, 2, 0), 3: wlt(1, 0, 1), 4: wlt(0, 1, 1),
	}
}

// TestClusteredVarianceByHand: the variance of the ratio estimator
// R = sum y_u / sum n_u over k sampled clusters (Cochran, Sampling
// Techniques, 3rd ed. 1977, section 6.3, without the finite population
// correction) is
//
//	v(R) = k/(k-1) * sum_u (y_u - R n_u)^2 / (sum_u n_u)^2.
//
// For fourUsers the residuals y_u - R n_u are 1, -1, 1/2, -1/2: sum of
// squares 5/2, so v = (4/3)(5/2)/64 = (10/3)/64. As if all eight
// impressions were independent (k = 8, n_u = 1, y in {1, 1, 0, 0, 1, 1/2,
// 0, 1/2}) the residuals are +-1/2 six times and 0 twice: sum of squares
// 3/2, v = (8/7)(3/2)/64 = (12/7)/64. The design effect (Kish 1965) is
// their ratio, (10/3)/(12/7) = 35/18; without the k/(k-1) factors it
// would be (5/2)/(3/2) = 5/3.
//
// The Delta interval then uses z^2 deff / n = 4 (35/18)/8 = 35/36 = c.
// With R = 1/2 the interval is symmetric: writing r = 1/2 + d, r(1-r) =
// 1/4 - d^2, so d^2 = c(1/4 - d^2 - t/4) = c(3/16 - d^2), and
// d^2 = 3c/(16(1+c)) = (35/12)/(16 * 71/36) = 105/1136: Delta's CI is
// +-sqrt(105/1136) = +-0.304022331.
func TestClusteredVarianceByHand(t *testing.T) {
	total, users := fourUsers()
	s, err := Compute(Input{Outcomes: total, Users: users, Params: Params{Alpha: alphaZ2}})
	if err != nil {
		t.Fatal(err)
	}
	if s.Users != 4 || s.Delta != 0 {
		t.Fatalf("users %d, Delta %v; want 4 and 0", s.Users, s.Delta)
	}
	if want := 35.0 / 18; math.Abs(s.DesignEffect-want) > 1e-12 {
		t.Errorf("design effect %v, want 35/18 = %v", s.DesignEffect, want)
	}
	d := math.Sqrt(105.0 / 1136)
	if math.Abs(d-0.304022331) > 1e-9 {
		t.Fatalf("closed form %v disagrees with the hand value", d)
	}
	if !widens(s.CI, Interval{-d, d}, 1/8.0) || math.Abs(s.CI[0]+s.CI[1]) > 1e-9 {
		t.Errorf("CI = %v, want [-%v, %v] widened symmetrically by at most 1/n", s.CI, d, d)
	}
}

// logMixtureLR is the Beta(a, a) mixture likelihood ratio against share p0
// after s successes and f failures (Robbins 1970), computed here from
// math.Lgamma, independently of the package's own:
//
//	log B(a+s, a+f) - log B(a, a) - s log p0 - f log(1-p0).
func logMixtureLR(a, s, f, p0 float64) float64 {
	lbeta := func(x, y float64) float64 {
		gx, _ := math.Lgamma(x)
		gy, _ := math.Lgamma(y)
		gxy, _ := math.Lgamma(x + y)
		return gx + gy - gxy
	}
	return lbeta(a+s, a+f) - lbeta(a, a) - s*math.Log(p0) - f*math.Log1p(-p0)
}

// TestNonInferiorityIsAlwaysValid: non-inferiority (the lower end of Delta
// above -margin) must be judged on the always-valid interval, which may be
// watched, not on the fixed-sample one. Margin 0.05, default alpha 0.05
// and MDE 0.02, so the mixture is Beta(312, 312) ((1/(4 MDE^2) - 1)/2,
// see MixtureForMDE), no ties and no users.
//
// W = L = 300: the fixed-sample interval is Wilson's at x = 300, n = 600:
// 1/2 +- z sqrt(n/4 + z^2/4)/(n + z^2) = 1/2 +- 0.03988 (z = 1.959964), so
// its lower end -0.0399 is above -0.05. But p0 = 0.45 (Delta = -0.05 with
// no ties) has mixture likelihood ratio 14.6 < 1/alpha = 20, so 0.45 is
// inside the confidence sequence even at level alpha, hence also at
// alpha/2: the always-valid lower end is below -0.05 and the challenger is
// not shown non-inferior.
//
// W = L = 1500: the ratio at 0.45 is 1.5e6, far above 40, so the
// always-valid lower end is above -0.05: non-inferior.
func TestNonInferiorityIsAlwaysValid(t *testing.T) {
	const margin = 0.05
	z := 1.959963984540054 // the 97.5% normal quantile (Abramowitz & Stegun table 26.5)
	tests := []struct {
		n           int64
		fixedHalf   float64 // Wilson's half-width at x = n, 2n trials
		logLR045    [2]float64
		nonInferior bool
	}{
		{300, z * math.Sqrt(150+z*z/4) / (600 + z*z), [2]float64{math.Log(14), math.Log(15)}, false},
		{1500, z * math.Sqrt(750+z*z/4) / (3000 + z*z), [2]float64{math.Log(1e6), math.Log(2e6)}, true},
	}
	for _, tc := range tests {
		w := float64(tc.n)
		if l := logMixtureLR(312, w, w, 0.45); l < tc.logLR045[0] || l > tc.logLR045[1] {
			t.Fatalf("W = L = %d: the hand-computed log ratio at 0.45 is %v, outside %v", tc.n, l, tc.logLR045)
		}
		s, err := Compute(Input{Outcomes: wlt(tc.n, tc.n, 0), Params: Params{Margin: margin}})
		if err != nil {
			t.Fatal(err)
		}
		if !widens(s.CI, Interval{-tc.fixedHalf, tc.fixedHalf}, 1/float64(2*tc.n)) || s.CI[0] <= -margin {
			t.Errorf("W = L = %d: fixed-sample CI %v, want lower end -%v (above -%v)", tc.n, s.CI, tc.fixedHalf, margin)
		}
		if below := s.CSDelta[0] < -margin; below == tc.nonInferior {
			t.Errorf("W = L = %d: always-valid interval %v; want its lower end above -%v: %v", tc.n, s.CSDelta, margin, tc.nonInferior)
		}
		if s.NonInferior != tc.nonInferior {
			t.Errorf("W = L = %d: NonInferior = %v, want %v (fixed-sample lower end %v, always-valid %v)",
				tc.n, s.NonInferior, tc.nonInferior, s.CI[0], s.CSDelta[0])
		}
	}
}

// TestDesignEffectBelowOneIsFloored: three users with one win and one loss
// each and one user with two wins (W = 5, L = 3, n = 8, R = 5/8) vary less
// between users than independent impressions would. By Cochran's formula
// (see TestClusteredVarianceByHand) the residuals y_u - R n_u are -1/4
// three times and 3/4: v = (4/3)(3/4)/64 = 1/64; independently, +3/8 five
// times and -5/8 three times: v = (8/7)(15/8)/64 = (15/7)/64. The design
// effect is 7/15. The package floors it at 1 wherever it enters a
// calculation, so Wilson's interval for the win share uses the raw counts
// 5 of 8: with z = 2, centre (5 + 2)/(8 + 4) = 7/12 and half-width
// 2 sqrt(5*3/8 + 1)/12 = sqrt(2.875)/6.
func TestDesignEffectBelowOneIsFloored(t *testing.T) {
	users := map[uint64][4]int64{1: wlt(1, 1, 0), 2: wlt(1, 1, 0), 3: wlt(1, 1, 0), 4: wlt(2, 0, 0)}
	s, err := Compute(Input{Outcomes: wlt(5, 3, 0), Users: users, Params: Params{Alpha: alphaZ2}})
	if err != nil {
		t.Fatal(err)
	}
	if want := 7.0 / 15; math.Abs(s.DesignEffect-want) > 1e-12 {
		t.Errorf("design effect %v, want 7/15 = %v", s.DesignEffect, want)
	}
	half := math.Sqrt(2.875) / 6
	if want := (Interval{7.0/12 - half, 7.0/12 + half}); math.Abs(s.Wilson[0]-want[0]) > 1e-9 || math.Abs(s.Wilson[1]-want[1]) > 1e-9 {
		t.Errorf("Wilson interval %v, want %v (raw counts: the design effect floored at 1)", s.Wilson, want)
	}
}

// widens reports whether got holds want and reaches at most by beyond it
// at either end.
func widens(got, want Interval, by float64) bool {
	const eps = 1e-12
	return got[0] <= want[0]+eps && got[1] >= want[1]-eps && want[0]-got[0] <= by && got[1]-want[1] <= by
}

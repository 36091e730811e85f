package verdict

import (
	"errors"
	"math"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// Worked examples of the Wilson score interval without continuity
// correction (method 3) from Newcombe, "Two-sided confidence intervals for
// the single proportion: comparison of seven methods", Statistics in
// Medicine 17 (1998) 857-872, Table II. Values recalled from memory of that
// paper, and cross-checked below against a gonum-based inversion of the
// score test.
var newcombe = []struct {
	x, n   float64
	lo, hi float64
}{
	{81, 263, 0.2553, 0.3662},
	{15, 148, 0.0624, 0.1605},
	{0, 20, 0, 0.1611},
	{1, 29, 0.0061, 0.1718},
}

func TestWilsonNewcombe(t *testing.T) {
	for _, c := range newcombe {
		got, err := Wilson(c.x, c.n, 0.05)
		if err != nil {
			t.Fatalf("Wilson(%v, %v): %v", c.x, c.n, err)
		}
		// Newcombe prints four decimals.
		if math.Abs(got.Lo()-c.lo) > 0.00005 || math.Abs(got.Hi()-c.hi) > 0.00005 {
			t.Errorf("Wilson(%v/%v) = [%.5f, %.5f], want [%.4f, %.4f] (Newcombe 1998)", c.x, c.n, got.Lo(), got.Hi(), c.lo, c.hi)
		}
	}
}

// scoreTestInversion computes the Wilson interval the long way: the set of
// p whose two-sided score test |x - n p| / sqrt(n p (1-p)) does not reject
// at alpha, with the p-value from gonum's normal CDF, ends found by
// bisection.
func scoreTestInversion(x, n, alpha float64) Interval {
	accept := func(p float64) bool {
		z := math.Abs(x-n*p) / math.Sqrt(n*p*(1-p))
		return 2*distuv.UnitNormal.Survival(z) >= alpha
	}
	find := func(in, out float64) float64 {
		for range 100 {
			mid := (in + out) / 2
			if accept(mid) {
				in = mid
			} else {
				out = mid
			}
		}
		return in
	}
	phat := x / n
	lo, hi := 0.0, 1.0
	if x > 0 {
		lo = find(phat, 0)
	}
	if x < n {
		hi = find(phat, 1)
	}
	return Interval{lo, hi}
}

func TestWilsonAgainstScoreTestInversion(t *testing.T) {
	cases := []struct{ x, n, alpha float64 }{
		{81, 263, 0.05}, {15, 148, 0.05}, {0, 20, 0.05}, {1, 29, 0.05},
		{7, 7, 0.05}, {3, 10, 0.01}, {500, 1000, 0.1}, {12.5, 40.25, 0.05},
	}
	for _, c := range cases {
		got, err := Wilson(c.x, c.n, c.alpha)
		if err != nil {
			t.Fatal(err)
		}
		want := scoreTestInversion(c.x, c.n, c.alpha)
		if math.Abs(got.Lo()-want.Lo()) > 1e-9 || math.Abs(got.Hi()-want.Hi()) > 1e-9 {
			t.Errorf("Wilson(%v, %v, %v) = %v, want %v (score test inverted with gonum)", c.x, c.n, c.alpha, got, want)
		}
	}
}

func TestWilsonBadInput(t *testing.T) {
	cases := []struct{ x, n, alpha float64 }{
		{-1, 10, 0.05}, {11, 10, 0.05}, {1, 10, 0}, {1, 10, 1}, {math.NaN(), 10, 0.05}, {1, math.Inf(1), 0.05},
	}
	for _, c := range cases {
		if _, err := Wilson(c.x, c.n, c.alpha); !errors.Is(err, ErrInput) {
			t.Errorf("Wilson(%v, %v, %v) error = %v, want ErrInput", c.x, c.n, c.alpha, err)
		}
	}
	if got, err := Wilson(0, 0, 0.05); err != nil || got != (Interval{0, 1}) {
		t.Errorf("Wilson(0, 0) = %v, %v; want [0, 1]", got, err)
	}
}

// With no ties and no clustering the interval for the preference share is
// Wilson's (Wilson 1927) with a continuity correction c = 1/(4n): its ends
// solve (p^ -+ c - p)^2 = z^2 p (1-p) / n, the quadratic solved here in
// closed form, independently of the bisection the code uses.
func TestPreferenceIntervalReducesToCorrectedWilson(t *testing.T) {
	z := zTwoSided(0.05)
	root := func(a, n float64, upper bool) float64 {
		k := z * z / n
		b := 2*a + k
		d := math.Sqrt(b*b - 4*(1+k)*a*a)
		if upper {
			return min(1, (b+d)/(2*(1+k)))
		}
		return max(0, (b-d)/(2*(1+k)))
	}
	for _, c := range newcombe {
		cc := 1 / (4 * c.n)
		p := c.x / c.n
		want := Interval{0, 1}
		if p-cc > 0 {
			want[0] = root(p-cc, c.n, false)
		}
		if p+cc < 1 {
			want[1] = root(p+cc, c.n, true)
		}
		got := preferenceInterval(c.x, c.n-c.x, 0, 1, z)
		if math.Abs(got.Lo()-want.Lo()) > 1e-12 || math.Abs(got.Hi()-want.Hi()) > 1e-12 {
			t.Errorf("preferenceInterval(%v/%v) = %v, want corrected Wilson %v", c.x, c.n, got, want)
		}
		if w, _ := Wilson(c.x, c.n, 0.05); got.Lo() > w.Lo() || got.Hi() < w.Hi() {
			t.Errorf("preferenceInterval(%v/%v) = %v narrower than Wilson %v", c.x, c.n, got, w)
		}
	}
}

// For large samples the score interval approaches the textbook normal
// (Wald) interval R +/- z sqrt(V) with V the clustered variance.
func TestPreferenceIntervalLargeSampleIsWald(t *testing.T) {
	var w, l, tie int64 = 40000, 35000, 25000
	users := map[uint64][4]int64{}
	// 10000 users of 10 impressions, each user's outcomes in a block.
	for u := uint64(1); u <= 10000; u++ {
		switch {
		case u <= 4000:
			users[u] = [4]int64{0, 0, 10, 0}
		case u <= 7500:
			users[u] = [4]int64{0, 10, 0, 0}
		default:
			users[u] = [4]int64{0, 0, 0, 10}
		}
	}
	cl, err := cluster([4]int64{0, l, w, tie}, users)
	if err != nil {
		t.Fatal(err)
	}
	n := float64(w + l + tie)
	r := (float64(w) + float64(tie)/2) / n
	z := zTwoSided(0.05)
	got := preferenceInterval(float64(w), float64(l), float64(tie), cl.designEffect(), z)
	half := z * math.Sqrt(cl.clustered)
	want := Interval{r - half, r + half}
	if math.Abs(got.Lo()-want.Lo()) > 2e-4 || math.Abs(got.Hi()-want.Hi()) > 2e-4 {
		t.Errorf("score interval %v, want about the Wald interval %v (design effect %.2f)", got, want, cl.designEffect())
	}
}

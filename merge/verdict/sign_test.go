package verdict

import (
	"errors"
	"math"
	"math/big"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// exactSignP enumerates the two-sided sign test p-value as an exact
// fraction: 2 sum_{i >= max(k, n-k)} C(n, i) / 2^n, at most 1.
func exactSignP(k, n int64) float64 {
	hi := max(k, n-k)
	sum := new(big.Int)
	c := new(big.Int).Binomial(n, hi)
	for i := hi; i <= n; i++ {
		sum.Add(sum, c)
		c.Mul(c, big.NewInt(n-i)).Quo(c, big.NewInt(i+1)) // C(n, i+1)
	}
	p := new(big.Rat).SetFrac(new(big.Int).Lsh(sum, 1), new(big.Int).Lsh(big.NewInt(1), uint(n)))
	if p.Cmp(big.NewRat(1, 1)) > 0 {
		return 1
	}
	f, _ := p.Float64()
	return f
}

func TestSignTestWorkedValues(t *testing.T) {
	cases := []struct {
		wins, losses int64
		want         float64
		source       string
	}{
		// 2 (C(10,9) + C(10,10)) / 2^10 = 22/1024 by direct enumeration.
		{9, 1, 22.0 / 1024, "22/1024"},
		{1, 9, 22.0 / 1024, "22/1024, mirrored"},
		// 2 (C(20,15) + ... + C(20,20)) / 2^20 = 2 * 21700 / 1048576.
		{15, 5, 43400.0 / 1048576, "43400/1048576"},
		{5, 5, 1, "a balanced split"},
		{0, 0, 1, "no trials"},
	}
	for _, c := range cases {
		got, err := SignTestPValue(c.wins, c.losses)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(got-c.want) > 1e-12 {
			t.Errorf("SignTestPValue(%d, %d) = %.10g, want %.10g (%s)", c.wins, c.losses, got, c.want, c.source)
		}
	}
}

func TestSignTestAgainstEnumerationAndGonum(t *testing.T) {
	// Exact enumeration with big integers on a grid of n and k, relative
	// error, far tails included.
	check := func(k, n int64) {
		got, _ := SignTestPValue(k, n-k)
		want := exactSignP(k, n)
		if math.Abs(got-want) > 1e-10*want {
			t.Errorf("SignTestPValue(%d, %d) = %.15g, want %.15g (enumeration)", k, n-k, got, want)
		}
	}
	for n := int64(1); n <= 60; n++ {
		for k := int64(0); k <= n; k++ {
			check(k, n)
		}
	}
	for _, n := range []int64{500, 2001} {
		for k := int64(0); k <= n; k += 37 {
			check(k, n)
		}
	}
	// gonum's distuv.Binomial tail on a grid up to large n; its Survival is
	// 1 - CDF, so it is compared with an absolute tolerance of 1e-15.
	for _, n := range []int64{1, 2, 7, 30, 101, 500, 2000, 10000} {
		for _, frac := range []float64{0, 0.1, 0.3, 0.45, 0.5, 0.52, 0.6, 0.9, 1} {
			k := int64(math.Round(frac * float64(n)))
			hi := max(k, n-k)
			b := distuv.Binomial{N: float64(n), P: 0.5}
			want := min(1, 2*b.Survival(float64(hi)-1))
			if 2*hi == n {
				want = 1
			}
			got, _ := SignTestPValue(k, n-k)
			if math.Abs(got-want) > 1e-9*want+1e-15 {
				t.Errorf("SignTestPValue(%d, %d) = %.15g, want %.15g (distuv.Binomial)", k, n-k, got, want)
			}
		}
	}
}

func TestSignTestBadInput(t *testing.T) {
	if _, err := SignTestPValue(-1, 3); !errors.Is(err, ErrInput) {
		t.Errorf("SignTestPValue(-1, 3) error = %v, want ErrInput", err)
	}
}

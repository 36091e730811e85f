package merge

import (
	"math"
	"testing"
)

// TestDebiasWeight checks the inverse-propensity weights 1/p(rank) with
// p(rank) = (1/rank)^eta (Joachims, Swaminathan & Schnabel, WSDM 2017,
// section 5), worked by hand: for eta = 1, 1/(1/r) = r; for eta = 2,
// 1/(1/r)^2 = r^2.
func TestDebiasWeight(t *testing.T) {
	tests := []struct {
		eta  float64
		want [5]float64 // ranks 1..5
	}{
		{0, [5]float64{1, 1, 1, 1, 1}},
		{1, [5]float64{1, 2, 3, 4, 5}},
		{2, [5]float64{1, 4, 9, 16, 25}},
		{0.5, [5]float64{1, math.Sqrt2, math.Sqrt(3), 2, math.Sqrt(5)}},
	}
	for _, tt := range tests {
		for r := 1; r <= 5; r++ {
			if got := DebiasWeight(r, tt.eta); math.Abs(got-tt.want[r-1]) > 1e-12 {
				t.Errorf("DebiasWeight(%d, %v) = %v, want %v", r, tt.eta, got, tt.want[r-1])
			}
		}
	}
}

// TestDebiasWeightBadInput checks that nonsense input means no debiasing.
func TestDebiasWeightBadInput(t *testing.T) {
	for _, tt := range []struct {
		rank int
		eta  float64
	}{{0, 1}, {-3, 2}, {4, -1}, {4, math.NaN()}, {4, math.Inf(1)}} {
		if got := DebiasWeight(tt.rank, tt.eta); got != 1 {
			t.Errorf("DebiasWeight(%d, %v) = %v, want 1", tt.rank, tt.eta, got)
		}
	}
}

// TestDebias checks that Debias scales each click by its position's weight.
func TestDebias(t *testing.T) {
	clicks := Debias([]Click{{0, 1}, {2, 3}, {4, 0.5}}, 2)
	want := []Click{{0, 1}, {2, 27}, {4, 12.5}} // 1*1, 3*3^2, 0.5*5^2
	for i := range want {
		if clicks[i] != want[i] {
			t.Errorf("click %d = %+v, want %+v", i, clicks[i], want[i])
		}
	}
}

// TestRanks checks the cross ranks on a hand-worked pair with repeats.
func TestRanks(t *testing.T) {
	inB, inA := Ranks([]string{"x", "y", "x", "z"}, []string{"z", "w", "x", "z", "y"})
	wantB := []int32{3, 5, -1, 1} // x is b's 3rd, y its 5th, x repeats, z b's 1st
	wantA := []int32{4, 0, 1, -1, 2}
	if !equal32(inB, wantB) || !equal32(inA, wantA) {
		t.Fatalf("Ranks = %v, %v; want %v, %v", inB, inA, wantB, wantA)
	}
}

func equal32(a, b []int32) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

package simulate

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"
)

// TestDCG checks DCG against the worked example of the Wikipedia article
// "Discounted cumulative gain" (values recalled from memory): relevances
// 3, 2, 3, 0, 1, 2 with gain equal to the relevance give DCG6 = 6.861;
// with two more judged documents of relevance 3 and 2 the ideal order
// 3, 3, 3, 2, 2, 2 gives IDCG6 = 8.740, so nDCG6 = 0.785.
func TestDCG(t *testing.T) {
	linear := func(rel []int) []float64 {
		g := make([]float64, len(rel))
		for i, r := range rel {
			g[i] = float64(r)
		}
		return g
	}
	tests := []struct {
		name string
		rel  []int
		k    int
		want float64
	}{
		{"example", []int{3, 2, 3, 0, 1, 2}, 6, 6.861},
		{"ideal", []int{3, 3, 3, 2, 2, 2}, 6, 8.740},
		{"cut at 1", []int{3, 2, 3}, 1, 3},
		{"k past the end", []int{3, 2}, 10, 3 + 2/math.Log2(3)},
		{"empty", nil, 5, 0},
	}
	for _, tc := range tests {
		if got := DCG(linear(tc.rel), tc.k); math.Abs(got-tc.want) > 0.0005 {
			t.Errorf("%s: DCG %.4f, want %.3f", tc.name, got, tc.want)
		}
	}
	if got := DCG(linear([]int{3, 2, 3, 0, 1, 2}), 6) / DCG(linear([]int{3, 3, 3, 2, 2, 2}), 6); math.Abs(got-0.785) > 0.0005 {
		t.Errorf("nDCG6 %.4f, want 0.785", got)
	}
}

// TestNDCG checks NDCG with exponential gain 2^g - 1 (Burges et al., ICML
// 2005) on cases worked by hand from the formula.
func TestNDCG(t *testing.T) {
	tests := []struct {
		name           string
		ranked, judged []int
		k              int
		want           float64
	}{
		// DCG = 3/1 + 0 + 1/2; ideal 2, 1: 3/1 + 1/log2(3).
		{"hand", []int{2, 0, 1}, []int{0, 2, 1, 0}, 3, 3.5 / (3 + 1/math.Log2(3))},
		{"ideal", []int{4, 3, 0}, []int{0, 3, 4}, 3, 1},
		{"nothing relevant", []int{0, 0}, []int{0, 0, 0}, 2, 0},
		// Only the top 1 counts: 1 against the ideal 15.
		{"cutoff", []int{1, 4}, []int{4, 1}, 1, 1.0 / 15},
	}
	for _, tc := range tests {
		if got := NDCG(tc.ranked, tc.judged, tc.k); math.Abs(got-tc.want) > 1e-12 {
			t.Errorf("%s: NDCG %.6f, want %.6f", tc.name, got, tc.want)
		}
	}
	if Gain(7) != 15 || Gain(-1) != 0 {
		t.Errorf("Gain clamps grades: got %v, %v; want 15, 0", Gain(7), Gain(-1))
	}
}

// TestClickModels checks each model's click probability at every position
// against its definition, by simulation within 5 standard errors: for a
// cascade user (Craswell, Zoeter, Taylor & Ramsey, WSDM 2008) position r
// is clicked with probability c(r) times the product over earlier
// positions i of 1 - c(i)s(i); for the position-based model (Chuklin,
// Markov & de Rijke 2015, section 3.3) with probability (1/r)^eta a(g).
func TestClickModels(t *testing.T) {
	grades := []int{4, 0, 2, 1, 3, 0, 4, 2}
	const draws = 40000
	for _, name := range ClickModelNames() {
		m, err := NewClickModel(name, 0.7)
		if err != nil {
			t.Fatal(err)
		}
		want := make([]float64, len(grades))
		switch m := m.(type) {
		case Cascade:
			reach := 1.0
			for r, g := range grades {
				want[r] = reach * m.Click[g]
				reach *= 1 - m.Click[g]*m.Stop[g]
			}
		case Position:
			for r, g := range grades {
				want[r] = math.Pow(1/float64(r+1), 0.7) * m.Attract[g]
			}
		}
		got := make([]float64, len(grades))
		rng := rand.New(rand.NewPCG(1, 2))
		var buf []int
		for range draws {
			buf = m.Clicks(buf, grades, rng)
			for _, p := range buf {
				got[p]++
			}
		}
		for r := range grades {
			got[r] /= draws
			if se := math.Sqrt(want[r] * (1 - want[r]) / draws); math.Abs(got[r]-want[r]) > 5*se+1e-9 {
				t.Errorf("%s position %d: clicked %.4f of the time, want %.4f", name, r+1, got[r], want[r])
			}
		}
	}
	if _, err := NewClickModel("impatient", 0); !errors.Is(err, ErrUnknownClickModel) {
		t.Errorf("unknown model: err %v, want ErrUnknownClickModel", err)
	}
	if _, err := NewClickModel("position", -1); !errors.Is(err, ErrConfig) {
		t.Errorf("position eta -1: err %v, want ErrConfig", err)
	}
}

// TestSyntheticQuality checks the rankers of controlled quality: the one
// with less noise has the higher mean NDCG over many queries, and noise 0
// gives the ideal ranking (NDCG 1, up to ties among equal grades).
func TestSyntheticQuality(t *testing.T) {
	rng := rand.New(rand.NewPCG(4, 4))
	qs := Synthetic(rng, 200, 10, 0.5, 2)
	a, b := MeanNDCG(qs, 10)
	if !(a > b) {
		t.Errorf("noise 0.5 ranker NDCG %.3f, noise 2 ranker %.3f; want the first higher", a, b)
	}
	perfect := Synthetic(rng, 20, 10, 0, 0)
	if a, b := MeanNDCG(perfect, 10); math.Abs(a-1) > 1e-12 || math.Abs(b-1) > 1e-12 {
		t.Errorf("noiseless rankers NDCG %v, %v; want 1", a, b)
	}
	for _, q := range Rotated(qs[:3]) {
		if len(q.A) != 10 || q.B[9] != q.A[0] || q.B[0] != q.A[1] {
			t.Errorf("rotated %v: B %v is not A rotated up by one", q.A, q.B)
		}
	}
}

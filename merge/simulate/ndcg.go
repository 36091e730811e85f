package simulate

import (
	"math"
	"slices"
)

// Gain is the exponential gain 2^g - 1 of grade g (Burges et al., "Learning
// to rank using gradient descent", ICML 2005), which rewards the highest
// grades most; grades outside 0..MaxGrade are clamped.
func Gain(g int) float64 { return math.Exp2(float64(clampGrade(g))) - 1 }

// DCG is the discounted cumulative gain of the first k gains (all when k
// exceeds their number): the sum of gain_i / log2(i+1) over 1-based
// positions i (Järvelin & Kekäläinen, "Cumulated gain-based evaluation of
// IR techniques", ACM TOIS 20(4), 2002, with the log2(i+1) discount).
func DCG(gains []float64, k int) float64 {
	sum := 0.0
	for i, g := range gains[:min(k, len(gains))] {
		sum += g / math.Log2(float64(i+2))
	}
	return sum
}

// NDCG is the normalised DCG at k of a ranking whose items have the given
// grades, with exponential gain: its DCG over that of the ideal ranking of
// judged, the grades of every judged item of the query. It is 0 when the
// query has no relevant item.
func NDCG(ranked, judged []int, k int) float64 {
	ideal := slices.Clone(judged)
	slices.SortFunc(ideal, func(x, y int) int { return y - x })
	idcg := DCG(gains(ideal, k), k)
	if idcg == 0 {
		return 0
	}
	return DCG(gains(ranked, k), k) / idcg
}

// gains maps the first k grades to their gains.
func gains(grades []int, k int) []float64 {
	out := make([]float64, min(k, len(grades)))
	for i := range out {
		out[i] = Gain(grades[i])
	}
	return out
}

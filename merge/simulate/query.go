package simulate

import (
	"fmt"
	"math/rand/v2"
	"slices"
)

// gradeShares is how often each grade 0..4 occurs among a synthetic query's
// items: most items are irrelevant and few are perfect, the shape of judged
// learning-to-rank collections (common practice; the exact shares are this
// project's choice).
func gradeShares() [MaxGrade + 1]float64 { return [...]float64{0.5, 0.25, 0.13, 0.08, 0.04} }

// Query is one query of a simulated experiment: graded judgements and the
// two rankers' lists for it.
type Query struct {
	// ID names the query (a TREC topic, or a synthetic name).
	ID string
	// Grades holds the relevance grade (0..MaxGrade) of each judged item;
	// an item not in it counts as grade 0.
	Grades map[string]int
	// A and B are the incumbent's and the challenger's ranked lists.
	A, B []string
}

// grades returns the grades of items, in order, appended to dst[:0].
func (q *Query) grades(dst []int, items []string) []int {
	dst = dst[:0]
	for _, it := range items {
		dst = append(dst, q.Grades[it])
	}
	return dst
}

// judged returns the grades of all judged items.
func (q *Query) judged() []int {
	out := make([]int, 0, len(q.Grades))
	for _, g := range q.Grades {
		out = append(out, g)
	}
	return out
}

// MeanNDCG returns the mean NDCG@k (see NDCG) of the A lists and of the B
// lists over the queries.
func MeanNDCG(qs []Query, k int) (a, b float64) {
	if len(qs) == 0 {
		return 0, 0
	}
	var buf []int
	for i := range qs {
		j := qs[i].judged()
		buf = qs[i].grades(buf, qs[i].A)
		a += NDCG(buf, j, k)
		buf = qs[i].grades(buf, qs[i].B)
		b += NDCG(buf, j, k)
	}
	return a / float64(len(qs)), b / float64(len(qs))
}

// Synthetic returns n synthetic queries of 4k items each, graded at random
// in the shares of gradeShares, with lists of length k from two rankers of
// controlled quality: each ranker scores an item by its grade plus normal
// noise of standard deviation noiseA or noiseB and lists its top k, so
// the ranker with less noise is the better one in expectation (which one
// is better on these queries is for NDCG to say).
func Synthetic(r *rand.Rand, n, k int, noiseA, noiseB float64) []Query {
	qs := make([]Query, n)
	for i := range qs {
		q := &qs[i]
		q.ID = fmt.Sprintf("q%03d", i+1)
		q.Grades = make(map[string]int, 4*k)
		items := make([]string, 4*k)
		for d := range items {
			items[d] = fmt.Sprintf("q%03d-d%03d", i+1, d+1)
			q.Grades[items[d]] = drawGrade(r)
		}
		q.A = noisyTop(r, items, q.Grades, k, noiseA)
		q.B = noisyTop(r, items, q.Grades, k, noiseB)
	}
	return qs
}

// drawGrade draws a grade in the shares of gradeShares.
func drawGrade(r *rand.Rand) int {
	u := r.Float64()
	for g, p := range gradeShares() {
		if u < p {
			return g
		}
		u -= p
	}
	return MaxGrade
}

// noisyTop ranks items by grade plus N(0, noise^2) and returns the top k.
func noisyTop(r *rand.Rand, items []string, grades map[string]int, k int, noise float64) []string {
	type scored struct {
		item  string
		score float64
	}
	s := make([]scored, len(items))
	for i, it := range items {
		s[i] = scored{it, float64(grades[it]) + noise*r.NormFloat64()}
	}
	slices.SortStableFunc(s, func(x, y scored) int {
		switch {
		case x.score > y.score:
			return -1
		case x.score < y.score:
			return 1
		}
		return 0
	})
	top := make([]string, min(k, len(s)))
	for i := range top {
		top[i] = s[i].item
	}
	return top
}

// Rotated returns the queries with B replaced by A rotated up by one (A's
// top item moved to the bottom): the pairs on which balanced interleaving
// is known to be biased under random clicks, A = (a,b,c) against
// B = (b,c,a) being the smallest.
func Rotated(qs []Query) []Query {
	out := make([]Query, len(qs))
	for i, q := range qs {
		q.B = append(slices.Clone(q.A[min(1, len(q.A)):]), q.A[:min(1, len(q.A))]...)
		out[i] = q
	}
	return out
}

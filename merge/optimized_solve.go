package merge

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// optTol is how far a solution may miss a constraint.
const optTol = 1e-7

// errOptCheck reports a solver result that fails its own constraints.
var errOptCheck = errors.New("solution breaks a constraint")

// optProgram is the linear program of one overlap structure: the credit of
// every slot of every allowed list, and every list's sensitivity.
type optProgram struct {
	e     *optLists
	delta [][]float64 // delta[r][l] is the credit of a click on slot r of list l
	sens  []float64
}

// solve finds the distribution over key's allowed lists: probabilities
// that sum to one with zero expected credit at every slot (hence zero
// expected credit for clicks uniformly at random on any top k), maximising
// sensitivity. When no such distribution exists, which happens when one
// list runs out within the depth (its few items cannot earn back the credit
// the other list's items take), it takes the distribution of least total
// absolute expected credit over the cutoffs, and among those the most
// sensitive.
//
// Radlinski & Craswell (WSDM 2013, section 4.3) maximise a sensitivity of
// each allowed list; the measure used here is recalled from memory of that
// section and may differ from it in detail: a single click lands on slot r
// with probability proportional to 1/r, and a list is the more sensitive
// the higher the entropy of the outcome that click yields (challenger
// credit, incumbent credit, or none). A list where every click favours one
// side, or none, says little. Only the choice among unbiased distributions
// depends on it, never their unbiasedness. The objective is linear in the
// probabilities, so the program stays a linear one, solved by gonum's
// simplex (see optSimplex).
func (o *Optimized) solve(key optKey) (*optSolution, error) {
	e := optEnumerate(key)
	if len(e.lists) == 1 {
		return &optSolution{lists: e.lists, teams: e.teams, p: []float64{1}, cum: []float64{1}}, nil
	}
	pr := optProgram{e: e, delta: make([][]float64, e.depth), sens: make([]float64, len(e.lists))}
	for r := range pr.delta {
		pr.delta[r] = make([]float64, len(e.lists))
		for l, list := range e.lists {
			pr.delta[r][l] = o.delta(e.ranks(list[r]))
		}
	}
	for l := range e.lists {
		pr.sens[l] = pr.sensitivity(l)
	}
	x, err := pr.unbiased()
	if err != nil {
		x, err = pr.leastBiased()
	}
	if err != nil {
		return nil, fmt.Errorf("optimized: structure %v: %w", key, err)
	}
	return newOptSolution(e, x), nil
}

// sensitivity is the entropy of a single click's outcome on list l.
func (pr *optProgram) sensitivity(l int) float64 {
	h := 0.0
	for r := range pr.delta {
		h += 1 / float64(r+1)
	}
	var pa, pb float64
	for r, row := range pr.delta {
		switch f := 1 / float64(r+1) / h; {
		case row[l] > 0:
			pb += f
		case row[l] < 0:
			pa += f
		}
	}
	ent := 0.0
	for _, p := range [3]float64{pa, pb, 1 - pa - pb} {
		if p > 1e-12 {
			ent -= p * math.Log(p)
		}
	}
	return ent
}

// unbiased solves the exact program: sum of p is 1, expected credit at
// every slot 0, sensitivity maximal.
func (pr *optProgram) unbiased() ([]float64, error) {
	n := len(pr.sens)
	rows := append([][]float64{optOnes(n)}, pr.delta...)
	if pr.e.exhausted {
		// The list shows every item of both tops, so its total credit is
		// the same for every allowed list: the last slot's constraint is
		// beyond any distribution's reach (and implied when it holds).
		rows = rows[:len(rows)-1]
	}
	b := make([]float64, len(rows))
	b[0] = 1
	kept := optIndependentRows(rows)
	a := mat.NewDense(len(kept), n, nil)
	bk := make([]float64, len(kept))
	for i, r := range kept {
		a.SetRow(i, rows[r])
		bk[i] = b[r]
	}
	c := make([]float64, n)
	for l, s := range pr.sens {
		c[l] = -s
	}
	x, err := optSimplex(c, a, bk, optWork)
	if err != nil {
		return nil, err
	}
	if err := optCheck(rows, b, x); err != nil {
		return nil, err
	}
	return x, nil
}

// leastBiased solves the relaxed program in two phases. Variables are p,
// then for each cutoff k a pair of slacks (above, below) absorbing the
// expected credit of the top k. Phase one minimises the slacks' sum;
// phase two maximises sensitivity with the sum held at that minimum.
func (pr *optProgram) leastBiased() ([]float64, error) {
	n, d := len(pr.sens), len(pr.delta)
	m := n + 2*d
	rows := [][]float64{optOnes(n)}
	rows[0] = append(rows[0], make([]float64, 2*d)...)
	cum := make([]float64, n)
	for k, row := range pr.delta {
		for l, v := range row {
			cum[l] += v
		}
		r := append(append([]float64(nil), cum...), make([]float64, 2*d)...)
		r[n+2*k], r[n+2*k+1] = 1, -1
		rows = append(rows, r)
	}
	b := make([]float64, len(rows))
	b[0] = 1
	c := make([]float64, m)
	for i := n; i < m; i++ {
		c[i] = 1
	}
	x, err := optSimplex(c, optDense(rows), b, optWork)
	if err != nil {
		return nil, err
	}
	least := 0.0
	for _, v := range x[n:] {
		least += v
	}
	// Phase two: one more variable t >= 0 with sum(slacks) + t = least.
	for i := range rows {
		rows[i] = append(rows[i], 0)
	}
	limit := append(make([]float64, n), c[n:]...)
	rows = append(rows, append(limit, 1))
	b = append(b, least+1e-6*(1+least)) // room for optSimplex's moves
	c = make([]float64, m+1)
	for l, s := range pr.sens {
		c[l] = -s
	}
	x, err = optSimplex(c, optDense(rows), b, optWork)
	if err != nil {
		return nil, err
	}
	if err := optCheck(rows, b, x); err != nil {
		return nil, err
	}
	return x[:n], nil
}

// optOnes returns n ones.
func optOnes(n int) []float64 {
	v := make([]float64, n)
	for i := range v {
		v[i] = 1
	}
	return v
}

// optDense stacks equal-length rows into a matrix.
func optDense(rows [][]float64) *mat.Dense {
	a := mat.NewDense(len(rows), len(rows[0]), nil)
	for i, r := range rows {
		a.SetRow(i, r)
	}
	return a
}

// optCheck checks x >= 0 and rows*x = b, all rows, within optTol.
func optCheck(rows [][]float64, b, x []float64) error {
	for i, v := range x {
		if v < -optTol {
			return fmt.Errorf("variable %d is %g: %w", i, v, errOptCheck)
		}
	}
	for r, row := range rows {
		got := 0.0
		for l, v := range row {
			got += v * x[l]
		}
		if math.Abs(got-b[r]) > optTol*(1+math.Abs(b[r])) {
			return fmt.Errorf("row %d is %g, want %g: %w", r, got, b[r], errOptCheck)
		}
	}
	return nil
}

// newOptSolution keeps the lists of positive probability in x.
func newOptSolution(e *optLists, x []float64) *optSolution {
	sol := &optSolution{}
	sum := 0.0
	for l, p := range x {
		if p > 1e-12 {
			sol.lists = append(sol.lists, e.lists[l])
			sol.teams = append(sol.teams, e.teams[l])
			sol.p = append(sol.p, p)
			sum += p
		}
	}
	run := 0.0
	for i := range sol.p {
		sol.p[i] /= sum
		run += sol.p[i]
		sol.cum = append(sol.cum, run)
	}
	sol.cum[len(sol.cum)-1] = 1
	return sol
}

// optIndependentRows returns the indices of a linearly independent subset of
// rows spanning them all, starting with row 0, by Gram-Schmidt. The simplex
// needs full row rank; a dropped row is implied by the kept ones.
func optIndependentRows(rows [][]float64) []int {
	var basis [][]float64
	var kept []int
	for i, row := range rows {
		v, ok := optOrthonormalize(append([]float64(nil), row...), basis)
		if !ok {
			continue
		}
		basis = append(basis, v)
		kept = append(kept, i)
	}
	return kept
}

// optOrthonormalize removes from v (in place) its components along the
// orthonormal vectors of basis (one Gram-Schmidt step) and scales the rest
// to unit length. It reports false when v is zero or lies, to a relative
// 1e-9, in the span of basis.
func optOrthonormalize(v []float64, basis [][]float64) ([]float64, bool) {
	norm0 := math.Sqrt(optDot(v, v))
	for _, q := range basis {
		d := optDot(v, q)
		for k := range v {
			v[k] -= d * q[k]
		}
	}
	norm := math.Sqrt(optDot(v, v))
	if norm0 == 0 || norm <= 1e-9*norm0 {
		return v, false
	}
	for k := range v {
		v[k] /= norm
	}
	return v, true
}

// optDot is the inner product of two vectors of equal length.
func optDot(x, y []float64) float64 {
	s := 0.0
	for i := range x {
		s += x[i] * y[i]
	}
	return s
}

// optFallback is the distribution used if neither program can be solved
// (never seen in tests): each slot takes either list's best unshown item
// by a fair coin. Every list it gives is allowed.
func optFallback(key optKey) *optSolution {
	e := optEnumerate(key)
	sol := &optSolution{lists: e.lists, teams: e.teams}
	sum := 0.0
	for _, list := range e.lists {
		p := 1.0
		used := uint32(0)
		for _, v := range list[:e.depth] {
			if e.branches(used) == 2 {
				p /= 2
			}
			used |= 1 << v
		}
		sol.p = append(sol.p, p)
		sum += p
		sol.cum = append(sol.cum, sum)
	}
	return sol
}

// branches counts the distinct candidates (best unshown item of each list)
// after the items in used.
func (e *optLists) branches(used uint32) int {
	ca, cb := -1, -1
	for i := 0; i < e.la && ca < 0; i++ {
		if used&(1<<i) == 0 {
			ca = i
		}
	}
	for _, v := range e.bOrder {
		if used&(1<<v) == 0 {
			cb = int(v)
			break
		}
	}
	switch {
	case ca >= 0 && cb >= 0 && ca != cb:
		return 2
	case ca >= 0 || cb >= 0:
		return 1
	}
	return 0
}

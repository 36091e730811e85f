package merge

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/optimize/convex/lp"
)

// optKey is the overlap structure of two lists' tops, which is all the
// linear program depends on: the depth T it places, how many items of each
// list's top T there are (la, lb), and for each of the incumbent's top
// items its 1-based rank among the challenger's top T (0 when not there).
type optKey [3 + OptimizedDepth]uint8

// optStructure is one request's overlap structure together with where the
// program's abstract items sit in the concrete lists. Abstract item v < la
// is the incumbent's v-th top item; v >= la is the (v-la)-th of the
// challenger's top items that the incumbent's top lacks.
type optStructure struct {
	key    optKey
	depth  int
	la, lb uint8
	posA   [OptimizedDepth]int32 // index in a of each incumbent top item
	posB   [OptimizedDepth]int32 // index in b of each challenger top item
	onlyB  [OptimizedDepth]uint8 // for v >= la, the index into posB
}

// newOptStructure reads the structure of the lists' tops of length t from
// their cross ranks (see crossRanks; repeats are skipped).
func newOptStructure(xa, xb []int32, t int) optStructure {
	var st optStructure
	for i := 0; i < len(xa) && int(st.la) < t; i++ {
		if xa[i] != taken {
			st.posA[st.la] = int32(i)
			st.la++
		}
	}
	for j := 0; j < len(xb) && int(st.lb) < t; j++ {
		if xb[j] != taken {
			st.posB[st.lb] = int32(j)
			st.lb++
		}
	}
	var inA [OptimizedDepth]bool
	matched := 0
	for i := range st.la {
		rb := xa[st.posA[i]] // 1-based index into b, 0 when b lacks it
		for j := range st.lb {
			if rb > 0 && st.posB[j] == rb-1 {
				st.key[3+i] = j + 1
				inA[j] = true
				matched++
				break
			}
		}
	}
	k := 0
	for j := range st.lb {
		if !inA[j] {
			st.onlyB[k] = j
			k++
		}
	}
	st.depth = min(t, int(st.la)+int(st.lb)-matched)
	st.key[0], st.key[1], st.key[2] = uint8(st.depth), st.la, st.lb
	return st
}

// optSolution is a solved distribution over the allowed lists of one
// structure, keeping only lists of positive probability.
type optSolution struct {
	lists [][OptimizedDepth]uint8 // abstract items, slot by slot
	teams [][OptimizedDepth]Team  // whose best unshown item each slot was
	p     []float64               // probability of each list
	cum   []float64               // running sum of p, ending at 1
}

// optLists is every allowed list of one structure, in abstract items.
type optLists struct {
	depth, la int
	bOrder    []uint8 // abstract item at each rank of the challenger's top
	lists     [][OptimizedDepth]uint8
	teams     [][OptimizedDepth]Team
}

// optEnumerate lists every allowed list of key's structure: at each slot the
// best unshown item of either list. There are at most 2^depth.
func optEnumerate(key optKey) *optLists {
	e := &optLists{depth: int(key[0]), la: int(key[1])}
	extra := uint8(e.la)
	for j := range int(key[2]) {
		v := extra
		for i := range e.la {
			if int(key[3+i]) == j+1 {
				v = uint8(i)
			}
		}
		if v == extra {
			extra++
		}
		e.bOrder = append(e.bOrder, v)
	}
	var cur [OptimizedDepth]uint8
	var team [OptimizedDepth]Team
	e.walk(0, 0, cur, team)
	return e
}

// walk extends the allowed prefix of length k (items marked in used) by
// each list's best unshown item in turn.
func (e *optLists) walk(k int, used uint32, cur [OptimizedDepth]uint8, team [OptimizedDepth]Team) {
	if k == e.depth {
		e.lists = append(e.lists, cur)
		e.teams = append(e.teams, team)
		return
	}
	ca, cb := -1, -1
	for i := 0; i < e.la && ca < 0; i++ {
		if used&(1<<i) == 0 {
			ca = i
		}
	}
	rb := -1 // 0-based rank of cb in the challenger's top
	for j := 0; j < len(e.bOrder) && cb < 0; j++ {
		if v := int(e.bOrder[j]); used&(1<<v) == 0 {
			cb, rb = v, j
		}
	}
	if ca >= 0 {
		cur[k], team[k] = uint8(ca), Incumbent
		if ca == cb && rb < ca {
			team[k] = Challenger
		}
		e.walk(k+1, used|1<<ca, cur, team)
	}
	if cb >= 0 && cb != ca {
		cur[k], team[k] = uint8(cb), Challenger
		e.walk(k+1, used|1<<cb, cur, team)
	}
}

// ranks returns abstract item v's truncated ranks in the two lists' tops
// (depth+1 where a top lacks it).
func (e *optLists) ranks(v uint8) (ra, rb int) {
	ra, rb = e.depth+1, e.depth+1
	if int(v) < e.la {
		ra = int(v) + 1
	}
	for j, u := range e.bOrder {
		if u == v {
			rb = j + 1
		}
	}
	return ra, rb
}

// solve finds the distribution over key's allowed lists: probabilities that
// sum to one with zero expected credit at every slot (so zero expected
// credit for uniformly random clicks on any top k), maximising sensitivity.
//
// Sensitivity follows Radlinski & Craswell (WSDM 2013, section 4.3), as
// recalled from memory: a single click lands on slot r with probability
// proportional to 1/r, and a list is the more sensitive the higher the
// entropy of the outcome that click yields (challenger credit, incumbent
// credit, or none). A list where every click favours one side, or none,
// says little; the objective is linear in the probabilities, so the
// program stays a linear one.
func (o *Optimized) solve(key optKey) (*optSolution, error) {
	e := optEnumerate(key)
	n := len(e.lists)
	if n == 1 {
		return &optSolution{lists: e.lists, teams: e.teams, p: []float64{1}, cum: []float64{1}}, nil
	}
	rows := make([][]float64, 1+e.depth) // sum of p, then credit at each slot
	rows[0] = make([]float64, n)
	for r := 1; r <= e.depth; r++ {
		rows[r] = make([]float64, n)
	}
	c := make([]float64, n)
	for l, list := range e.lists {
		rows[0][l] = 1
		for r, v := range list[:e.depth] {
			rows[r+1][l] = o.delta(e.ranks(v))
		}
		c[l] = -optSensitivity(rows, l, e.depth)
	}
	kept := optIndependentRows(rows)
	a := mat.NewDense(len(kept), n, nil)
	b := make([]float64, len(kept))
	for i, r := range kept {
		a.SetRow(i, rows[r])
	}
	b[0] = 1 // kept[0] is always the sum row
	_, x, err := lp.Simplex(c, a, b, 1e-10, nil)
	if err != nil {
		return nil, fmt.Errorf("optimized: structure %v: %w", key, err)
	}
	return newOptSolution(e, rows, x)
}

// optSensitivity is the entropy of a single click's outcome on list l,
// where rows[1:] hold each slot's credit.
func optSensitivity(rows [][]float64, l, depth int) float64 {
	h := 0.0
	for r := 1; r <= depth; r++ {
		h += 1 / float64(r)
	}
	var pa, pb float64
	for r := 1; r <= depth; r++ {
		switch d := rows[r][l]; {
		case d > 0:
			pb += 1 / float64(r) / h
		case d < 0:
			pa += 1 / float64(r) / h
		}
	}
	ent := 0.0
	for _, p := range []float64{pa, pb, 1 - pa - pb} {
		if p > 1e-12 {
			ent -= p * math.Log(p)
		}
	}
	return ent
}

// errOptCheck reports a program solution that fails its own constraints.
var errOptCheck = errors.New("solution breaks a constraint")

// newOptSolution checks x against every constraint row (not only the
// independent ones the solver saw) and keeps its positive entries.
func newOptSolution(e *optLists, rows [][]float64, x []float64) (*optSolution, error) {
	const tol = 1e-7
	for r, row := range rows {
		got, want := 0.0, 0.0
		if r == 0 {
			want = 1
		}
		for l, p := range x {
			got += row[l] * p
		}
		if math.Abs(got-want) > tol*float64(len(x)) {
			return nil, fmt.Errorf("optimized: row %d sums to %g, want %g: %w", r, got, want, errOptCheck)
		}
	}
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
	return sol, nil
}

// optIndependentRows returns the indices of a linearly independent subset of
// rows spanning them all, starting with row 0, by Gram-Schmidt. The simplex
// needs full row rank; a dropped row is implied by the kept ones.
func optIndependentRows(rows [][]float64) []int {
	var basis [][]float64
	var kept []int
	for i, row := range rows {
		v := append([]float64(nil), row...)
		norm0 := math.Sqrt(optDot(v, v))
		for _, q := range basis {
			d := optDot(v, q)
			for k := range v {
				v[k] -= d * q[k]
			}
		}
		norm := math.Sqrt(optDot(v, v))
		if norm0 == 0 || norm <= 1e-9*norm0 {
			continue
		}
		for k := range v {
			v[k] /= norm
		}
		basis = append(basis, v)
		kept = append(kept, i)
	}
	return kept
}

// optDot is the inner product of two vectors of equal length.
func optDot(x, y []float64) float64 {
	s := 0.0
	for i := range x {
		s += x[i] * y[i]
	}
	return s
}

// optFallback is the distribution used if the program cannot be solved:
// each slot takes either list's best unshown item by a fair coin, as
// balanced choices between the two candidates. Every list it gives is
// allowed.
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

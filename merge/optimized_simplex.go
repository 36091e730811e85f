package merge

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/optimize/convex/lp"
)

// optWork bounds the matrix reads of one simplex run: far more than any
// program of depth OptimizedDepth needs (a solve reads a few hundred
// thousand entries), and still a fraction of a second.
const optWork = 50_000_000

// errOptWork reports a simplex run stopped for reading more than optWork
// matrix entries, which only a cycling simplex does.
var errOptWork = errors.New("simplex exceeded its work bound")

// optSimplex solves min c.x subject to a x = b, x >= 0 (b >= 0) with
// gonum's simplex, guarding against its weakness on these programs: they
// are highly degenerate (every right-hand side but one is zero), and on a
// degenerate program the simplex may cycle without end. Three guards:
//
//   - every right-hand side is moved up by a distinct amount of about 1e-8
//     (the perturbation method of Charnes, 1952; Chvátal, Linear
//     Programming, 1983, chapter 3), which removes the ties cycling needs;
//     the solution's nonzero entries are then recomputed from the unmoved
//     right-hand sides, which is exact when the moved program's optimal
//     basis is optimal for the original, as it is for small enough moves;
//   - the starting basis is supplied (phase one is solved as its own
//     program from the artificial variables' identity basis), so that
//     every iteration reads the constraint matrix through
//   - a counting view of the matrix that stops the run, by a panic
//     recovered here, once it has read work entries (optWork in use).
func optSimplex(c []float64, a *mat.Dense, b []float64, work int) (x []float64, err error) {
	defer func() {
		if r := recover(); r != nil {
			x, err = nil, fmt.Errorf("simplex: %v: %w", r, errOptWork)
		}
	}()
	m, n := a.Dims()
	moved := make([]float64, m)
	for i, v := range b {
		frac := math.Mod(float64(i+1)*0.6180339887498949, 1) // golden-ratio steps: distinct
		moved[i] = v + (0.5+frac)*1e-8
	}
	budget := &optCounting{m: a, bound: work}
	// Phase one: min sum(art) s.t. a x + art = moved, from art = moved.
	a1 := mat.NewDense(m, n+m, nil)
	a1.Slice(0, m, 0, n).(*mat.Dense).Copy(a)
	c1 := make([]float64, n+m)
	basic := make([]int, m)
	for i := range m {
		a1.Set(i, n+i, 1)
		c1[n+i] = 1
		basic[i] = n + i
	}
	_, x1, err := lp.Simplex(c1, &optCounting{m: a1, left: budget}, moved, 1e-10, basic)
	if err != nil {
		return nil, err
	}
	for _, v := range x1[n:] {
		if v > 1e-9 {
			return nil, lp.ErrInfeasible
		}
	}
	basic, err = optBasis(a, x1[:n], moved)
	if err != nil {
		return nil, err
	}
	_, x, err = lp.Simplex(c, budget, moved, 1e-10, basic)
	if err != nil {
		return nil, err
	}
	return optPolish(a, x, b), nil
}

// optCounting is a read-only view of a matrix that panics once it (or the
// view it draws its allowance from, left) has served bound reads.
type optCounting struct {
	m            mat.Matrix
	reads, bound int
	left         *optCounting
}

// Dims implements mat.Matrix.
func (c *optCounting) Dims() (int, int) { return c.m.Dims() }

// At implements mat.Matrix.
func (c *optCounting) At(i, j int) float64 {
	owner := c
	if c.left != nil {
		owner = c.left
	}
	owner.reads++
	if owner.reads > owner.bound {
		panic("matrix read past the work bound")
	}
	return c.m.At(i, j)
}

// T implements mat.Matrix.
func (c *optCounting) T() mat.Matrix { return mat.Transpose{Matrix: c} }

// optBasis returns m columns of a forming a basis that holds the support
// of the feasible point x (a x = b): its nonzero columns, completed with
// other columns keeping them independent.
func optBasis(a *mat.Dense, x, b []float64) ([]int, error) {
	m, n := a.Dims()
	var basic []int
	var q [][]float64 // orthonormal basis of the chosen columns' span
	add := func(j int) bool {
		v, ok := optOrthonormalize(mat.Col(nil, j, a), q)
		if !ok {
			return false
		}
		q = append(q, v)
		basic = append(basic, j)
		return true
	}
	for j, v := range x {
		if v > 1e-12 && !add(j) {
			return nil, fmt.Errorf("support column %d is dependent: %w", j, errOptCheck)
		}
	}
	for j := 0; j < n && len(basic) < m; j++ {
		if x[j] <= 1e-12 {
			add(j)
		}
	}
	if len(basic) < m {
		return nil, fmt.Errorf("rank %d of %d rows: %w", len(basic), m, errOptCheck)
	}
	if z := optSolveOn(a, basic, b); z == nil || optMin(z) < -1e-12 {
		return nil, fmt.Errorf("starting basis not feasible: %w", errOptCheck)
	}
	return basic, nil
}

// optPolish recomputes the nonzero entries of the moved program's solution
// x from the unmoved right-hand sides b, keeping x when that fails or turns
// an entry negative.
func optPolish(a *mat.Dense, x, b []float64) []float64 {
	m, _ := a.Dims()
	var support []int
	for j, v := range x {
		if v > 1e-13 {
			support = append(support, j)
		}
	}
	if len(support) != m {
		return x
	}
	z := optSolveOn(a, support, b)
	if z == nil || optMin(z) < -1e-12 {
		return x
	}
	exact := make([]float64, len(x))
	for k, j := range support {
		exact[j] = max(z[k], 0)
	}
	return exact
}

// optSolveOn solves a[:, cols] z = b, or returns nil when singular.
func optSolveOn(a *mat.Dense, cols []int, b []float64) []float64 {
	m, _ := a.Dims()
	as := mat.NewDense(m, len(cols), nil)
	for k, j := range cols {
		as.SetCol(k, mat.Col(nil, j, a))
	}
	var z mat.VecDense
	if err := z.SolveVec(as, mat.NewVecDense(m, b)); err != nil {
		return nil
	}
	return z.RawVector().Data
}

// optMin is the smallest entry of a non-empty slice.
func optMin(v []float64) float64 {
	low := v[0]
	for _, x := range v[1:] {
		low = min(low, x)
	}
	return low
}

package gonumlp

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"sort"

	"github.com/pickwise/pickwise/lp"
	"gonum.org/v1/gonum/mat"
	glp "gonum.org/v1/gonum/optimize/convex/lp"
)

// statusError returns a *lp.StatusError of this backend.
func statusError(s lp.Status, format string, args ...any) error {
	return &lp.StatusError{Backend: "gonum", Status: s, Detail: fmt.Sprintf(format, args...)}
}

// solveStandard solves
//
//	minimise cᵀx  subject to  A x = b,  x_j >= 0 unless free[j],
//
// with A given by dense rows, and returns x and the rows kept (in
// increasing order): the rows left out were linearly dependent on the kept
// ones, or all zero, and can be given dual value 0.
//
// Before gonum's simplex sees the problem, free columns are eliminated by
// Gauss-Jordan pivots (gonum's standard form has no free variables, and
// splitting them into opposite pairs makes its simplex unreliable), and
// what gonum rejects is removed: all-zero rows (dropped when consistent,
// infeasible otherwise), all-zero columns (fixed at 0, or a direction of
// unboundedness), and linearly dependent rows (dropped when consistent,
// infeasible otherwise).
func solveStandard(c []float64, a [][]float64, b []float64, free []bool, tol float64) ([]float64, []int, error) {
	m, n := len(a), len(c)
	// The tableau: rows [A | b], and the size of the numbers that went
	// into each row, against which round-off is judged.
	t := make([][]float64, m)
	size := make([]float64, m)
	for k := range m {
		t[k] = append(append(make([]float64, 0, n+1), a[k]...), b[k])
		for _, v := range t[k] {
			size[k] = math.Max(size[k], math.Abs(v))
		}
	}
	cost := append(make([]float64, 0, n+1), c...)
	cost = append(cost, 0)
	costSize := 0.0
	for _, v := range c {
		costSize = math.Max(costSize, math.Abs(v))
	}

	// A free direction that lowers the objective makes the problem
	// unbounded once it is known to be feasible.
	ray := false

	// Gauss-Jordan on the free columns, with partial pivoting.
	pivot := make([]int, n)
	used := make([]bool, m)
	for j := range n {
		pivot[j] = -1
		if !free[j] {
			continue
		}
		best, bestAbs := -1, 0.0
		for k := range m {
			if v := math.Abs(t[k][j]); !used[k] && v > 1e-11*size[k] && v > bestAbs {
				best, bestAbs = k, v
			}
		}
		if best < 0 {
			// x_j appears only in pivot rows, whose free variables
			// absorb any change of it: it moves freely at rate cost[j].
			if math.Abs(cost[j]) > 1e-11*(1+costSize) {
				ray = true
			}
			continue
		}
		eliminate(t, size, cost, best, j)
		pivot[j], used[best] = best, true
	}

	// The rest: unused rows, non-free columns.
	var rows, cols []int
	for k := range m {
		if used[k] {
			continue
		}
		zero := true
		for j := range n {
			if !free[j] && t[k][j] != 0 {
				zero = false
				break
			}
		}
		if !zero {
			rows = append(rows, k)
			continue
		}
		if math.Abs(t[k][n]) > 1e-9*(1+size[k]) {
			return nil, nil, statusError(lp.Infeasible, "a constraint reduces to 0 = %g", t[k][n])
		}
	}
	for j := range n {
		if free[j] {
			continue
		}
		zero := true
		for _, k := range rows {
			if t[k][j] != 0 {
				zero = false
				break
			}
		}
		switch {
		case !zero:
			cols = append(cols, j)
		case cost[j] < -1e-11*(1+costSize):
			ray = true
		}
	}
	rows, err := independentRows(t, n, rows, cols)
	if err != nil {
		return nil, nil, err
	}

	x := make([]float64, n)
	if len(rows) > 0 {
		am := mat.NewDense(len(rows), len(cols), nil)
		bs := make([]float64, len(rows))
		cs := make([]float64, len(cols))
		for r, k := range rows {
			for q, j := range cols {
				am.Set(r, q, t[k][j])
			}
			bs[r] = t[k][n]
		}
		for q, j := range cols {
			cs[q] = cost[j]
		}
		xs, err := twoPhase(cs, am, bs, tol, true)
		if err != nil {
			return nil, nil, err
		}
		for q, j := range cols {
			x[j] = xs[q]
		}
	}
	if ray {
		return nil, nil, statusError(lp.Unbounded, "")
	}
	// Read the free columns back from their pivot rows.
	for j := range n {
		if k := pivot[j]; k >= 0 {
			v := t[k][n]
			for q := range n {
				if !free[q] {
					v -= t[k][q] * x[q]
				}
			}
			x[j] = v
			rows = append(rows, k)
		}
	}
	sort.Ints(rows)
	return x, rows, nil
}

// eliminate pivots the tableau t (and the cost row) on entry (r, j):
// row r is scaled to have 1 in column j, and column j is cleared from every
// other row and from the cost. Entries that cancel to round-off are set to
// zero.
func eliminate(t [][]float64, size []float64, cost []float64, r, j int) {
	row := t[r]
	inv := 1 / row[j]
	for q := range row {
		row[q] *= inv
	}
	row[j] = 1
	size[r] *= math.Abs(inv)
	update := func(dst []float64, f float64) {
		for q, v := range row {
			if v == 0 {
				continue
			}
			old := dst[q]
			dst[q] -= f * v
			if math.Abs(dst[q]) <= 1e-14*(math.Abs(old)+math.Abs(f*v)) {
				dst[q] = 0
			}
		}
		dst[j] = 0
	}
	for k := range t {
		if k == r || t[k][j] == 0 {
			continue
		}
		f := t[k][j]
		update(t[k], f)
		size[k] += math.Abs(f) * size[r]
	}
	if f := cost[j]; f != 0 {
		update(cost, f)
	}
}

// twoPhase solves min cᵀx, Ax = b, x >= 0, where A has full row rank and
// no zero row or column, with gonum's simplex.
//
// Gonum's simplex chooses entering columns by Dantzig's rule and switches
// to Bland's only for degenerate steps, a mix that can cycle forever (it
// did on a random LP of 14 rows). So gonum only ever sees b moved by random
// amounts of relative size 1e-11: then no vertex is degenerate, with
// probability 1, and no step is either. The optimal basis found for the
// moved b is then applied to b itself.
//
// Gonum's own phase I can also panic on a singular intermediate basis, so
// phase I is the textbook one: one artificial column per row, signed so
// that the artificials alone are a feasible basis. The support of its
// solution, completed to a basis with columns of A, starts phase II. Should
// that fail, gonum's own phase I is tried. When gonum reports the problem
// unbounded or fails numerically and confirm is set, the outcome is
// decided with solveBounded.
func twoPhase(c []float64, a *mat.Dense, b []float64, tol float64, confirm bool) ([]float64, error) {
	m, n := a.Dims()
	bSize := 0.0
	for _, v := range b {
		bSize = math.Max(bSize, math.Abs(v))
	}
	if m == n {
		// A is square and nonsingular: x is determined. (Gonum treats
		// this case alike but calls the problem infeasible at the
		// slightest negative round-off.)
		var xv mat.VecDense
		if err := xv.SolveVec(a, mat.NewVecDense(m, b)); err != nil {
			return nil, statusError(lp.NumericalTrouble, "%v", err)
		}
		x := xv.RawVector().Data
		for j, v := range x {
			if v < -1e-9*(1+bSize) {
				return nil, statusError(lp.Infeasible, "")
			}
			x[j] = math.Max(v, 0)
		}
		return x, nil
	}
	rng := rand.New(rand.NewPCG(uint64(m), uint64(n)))
	bp := make([]float64, m)
	for i, v := range b {
		bp[i] = v + 1e-11*(1+math.Abs(v))*(0.5+rng.Float64())
	}
	x, err := func() ([]float64, error) {
		a1 := mat.NewDense(m, n+m, nil)
		a1.Slice(0, m, 0, n).(*mat.Dense).Copy(a)
		c1 := make([]float64, n+m)
		basis := make([]int, m)
		for i := range m {
			s := 1.0
			if bp[i] < 0 {
				s = -1
			}
			a1.Set(i, n+i, s)
			c1[n+i] = 1
			basis[i] = n + i
		}
		x1, err := simplex(c1, a1, bp, tol, basis)
		if err != nil {
			return nil, err
		}
		infeas := 0.0
		for _, v := range x1[n:] {
			infeas += v
		}
		if infeas > 1e-9*(1+bSize) {
			return nil, statusError(lp.Infeasible, "")
		}
		start, xb, err := onBasis(a, bp, x1[:n], bSize)
		if err != nil {
			return nil, err
		}
		// Gonum requires the start to be feasible to 1e-13, which the
		// round-off of phase I can miss: b is moved to match the
		// start's values, raised to 0 where they fell below.
		var bv mat.VecDense
		bv.MulVec(basisMatrix(a, start), mat.NewVecDense(m, xb))
		return simplex(c, a, bv.RawVector().Data, tol, start)
	}()
	var se *lp.StatusError
	if err != nil && !(errors.As(err, &se) && (se.Status == lp.Infeasible || se.Status == lp.Unbounded)) {
		x, err = simplex(c, a, bp, tol, nil)
	}
	if err == nil {
		// The optimal basis for the moved b, applied to b.
		if basis, xb, err := onBasis(a, b, x, bSize); err == nil {
			clear(x)
			for i, j := range basis {
				x[j] = xb[i]
			}
		}
		return x, nil
	}
	if !confirm || errors.As(err, &se) && se.Status == lp.Infeasible {
		return nil, err
	}
	// Unbounded, or a numerical failure (which gonum's phase II meets on
	// some unbounded problems): decide with a bounded problem.
	xb, errb := solveBounded(c, a, b, tol)
	if errb == nil || errors.As(errb, &se) && se.Status == lp.Unbounded {
		return xb, errb
	}
	// The check itself failed: gonum's verdict or failure stands.
	return nil, err
}

// onBasis completes the support of x to a basis of a and returns it with
// the basic values for right-hand side b, raised to 0 where round-off put
// them below (by at most 1e-9 relative to b; more is an error).
func onBasis(a *mat.Dense, b, x []float64, bSize float64) ([]int, []float64, error) {
	basis, err := completeBasis(a, x)
	if err != nil {
		return nil, nil, err
	}
	m := len(b)
	var xv mat.VecDense
	if err := xv.SolveVec(basisMatrix(a, basis), mat.NewVecDense(m, b)); err != nil {
		return nil, nil, err
	}
	xb := xv.RawVector().Data
	for i, v := range xb {
		if v < -1e-9*(1+bSize) {
			return nil, nil, errors.New("basis infeasible")
		}
		xb[i] = math.Max(v, 0)
	}
	return basis, xb, nil
}

// basisMatrix returns the columns of a listed in basis.
func basisMatrix(a *mat.Dense, basis []int) *mat.Dense {
	m, _ := a.Dims()
	bm := mat.NewDense(m, len(basis), nil)
	for i, j := range basis {
		bm.SetCol(i, mat.Col(nil, j, a))
	}
	return bm
}

// completeBasis returns m linearly independent columns of a (m×n) that
// include every column where x is positive, or an error.
func completeBasis(a *mat.Dense, x []float64) ([]int, error) {
	m, n := a.Dims()
	// Candidates: the support first, then columns with one nonzero (well
	// conditioned), then the rest.
	var order []int
	inOrder := make([]bool, n)
	for j, v := range x {
		if v > 0 {
			order = append(order, j)
			inOrder[j] = true
		}
	}
	for pass := 0; pass < 2; pass++ {
		for j := range n {
			if inOrder[j] {
				continue
			}
			nz := 0
			for i := range m {
				if a.At(i, j) != 0 {
					nz++
				}
			}
			if (pass == 0) == (nz == 1) {
				order = append(order, j)
				inOrder[j] = true
			}
		}
	}
	var basis []int
	var q [][]float64 // orthonormal vectors spanning the chosen columns
	v := make([]float64, m)
	for _, j := range order {
		if len(basis) == m {
			break
		}
		mat.Col(v, j, a)
		norm0 := math.Sqrt(dot(v, v))
		for range 2 {
			for _, e := range q {
				d := dot(v, e)
				for i := range v {
					v[i] -= d * e[i]
				}
			}
		}
		norm := math.Sqrt(dot(v, v))
		if norm <= 1e-9*norm0 {
			continue
		}
		e := make([]float64, m)
		for i := range v {
			e[i] = v[i] / norm
		}
		q = append(q, e)
		basis = append(basis, j)
	}
	if len(basis) < m {
		return nil, errors.New("cannot complete a basis")
	}
	return basis, nil
}

func dot(u, v []float64) float64 {
	s := 0.0
	for i := range u {
		s += u[i] * v[i]
	}
	return s
}

// simplex calls gonum's Simplex and maps its errors and panics to
// *lp.StatusError.
func simplex(c []float64, a *mat.Dense, b []float64, tol float64, basis []int) (x []float64, err error) {
	defer func() {
		if r := recover(); r != nil {
			x, err = nil, statusError(lp.NumericalTrouble, "gonum simplex panicked: %v", r)
		}
	}()
	_, x, err = glp.Simplex(c, a, b, tol, basis)
	switch {
	case err == nil:
		return x, nil
	case errors.Is(err, glp.ErrInfeasible):
		return nil, statusError(lp.Infeasible, "")
	case errors.Is(err, glp.ErrUnbounded):
		return nil, statusError(lp.Unbounded, "")
	}
	return nil, statusError(lp.NumericalTrouble, "%v", err)
}

// solveBounded solves min cᵀx, Ax = b, x >= 0 with the extra row
// sum(x) + s = M, s >= 0, for M1 = 1e6 and M2 = 1e10 times the size of the
// data. The optimal value f(M) is convex, piecewise linear and
// non-increasing in M, with its breakpoints at the scale of the vertices of
// the problem; M1 and M2 lie beyond them for data of ordinary size. If
// f(M2) < f(M1) the objective falls without limit and the problem is
// unbounded; otherwise the optimum for M1 is optimal without the extra row.
//
// This decides two outcomes of gonum's simplex that cannot be trusted: its
// Bland step declares a problem unbounded when any column with a reduced
// cost below -1e-14, a level round-off reaches, has a nonnegative edge
// direction, and on some unbounded problems its phase II pivots to a
// singular basis. With the extra row no edge direction is a ray.
func solveBounded(c []float64, a *mat.Dense, b []float64, tol float64) ([]float64, error) {
	m, n := a.Dims()
	scale := 1.0
	for _, v := range b {
		scale = math.Max(scale, math.Abs(v))
	}
	for _, v := range c {
		scale = math.Max(scale, math.Abs(v))
	}
	ab := mat.NewDense(m+1, n+1, nil)
	ab.Slice(0, m, 0, n).(*mat.Dense).Copy(a)
	for j := range n + 1 {
		ab.Set(m, j, 1)
	}
	cb := append(append(make([]float64, 0, n+1), c...), 0)
	var xs [2][]float64
	var fs [2]float64
	for k, big := range []float64{1e6 * scale, 1e10 * scale} {
		bb := append(append(make([]float64, 0, m+1), b...), big)
		x, err := twoPhase(cb, ab, bb, tol, false)
		if err != nil {
			return nil, err
		}
		xs[k] = x[:n]
		fs[k] = dot(c, xs[k])
	}
	if fs[1] < fs[0]-1e-9*(1+math.Abs(fs[0])) {
		return nil, statusError(lp.Unbounded, "")
	}
	return xs[0], nil
}

// independentRows returns the rows of the tableau t (restricted to cols;
// column n holds the right-hand side) that are linearly independent,
// dropping the dependent ones. A dependent row whose right-hand side is not
// the same combination of the others' makes the system inconsistent: that
// is reported as infeasible.
//
// A row with a private column (nonzero in no other row) is independent of
// all others, so only the remaining rows are orthogonalised (modified
// Gram-Schmidt, twice, on the rows extended by their right-hand sides).
func independentRows(t [][]float64, n int, rows, cols []int) ([]int, error) {
	count := make([]int, len(cols))
	for _, k := range rows {
		for q, j := range cols {
			if t[k][j] != 0 {
				count[q]++
			}
		}
	}
	type basisRow struct {
		v  []float64 // unit vector over cols
		rb float64   // the right-hand side after the same operations
	}
	var basis []basisRow
	var keep []int
	for _, k := range rows {
		private := false
		for q, j := range cols {
			if t[k][j] != 0 && count[q] == 1 {
				private = true
				break
			}
		}
		if private {
			keep = append(keep, k)
			continue
		}
		v := make([]float64, len(cols))
		for q, j := range cols {
			v[q] = t[k][j]
		}
		norm0 := math.Sqrt(dot(v, v))
		rb, scale := t[k][n], math.Abs(t[k][n])
		for range 2 {
			for _, e := range basis {
				d := dot(v, e.v)
				for q := range v {
					v[q] -= d * e.v[q]
				}
				rb -= d * e.rb
				scale += math.Abs(d * e.rb)
			}
		}
		norm := math.Sqrt(dot(v, v))
		if norm <= 1e-9*norm0 {
			if math.Abs(rb) > 1e-9*(1+scale) {
				return nil, statusError(lp.Infeasible, "equality constraints are inconsistent")
			}
			continue
		}
		for q := range v {
			v[q] /= norm
		}
		basis = append(basis, basisRow{v, rb / norm})
		keep = append(keep, k)
	}
	return keep, nil
}

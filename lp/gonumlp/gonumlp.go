// Package gonumlp solves linear programs with gonum's pure-Go simplex
// (gonum.org/v1/gonum/optimize/convex/lp).
//
// Gonum solves the standard form
//
//	minimise cᵀx  subject to  A x = b,  x >= 0
//
// with dense matrices, so this backend suits small problems (up to a few
// thousand nonzeros) and serves as an independent reference for the CLP
// backend in tests. A general lp.Problem is brought to that form by
// shifting columns to their finite bound, mirroring columns bounded only
// above, substituting fixed columns, and adding a slack per inequality row
// and per doubly bounded column. Free columns are eliminated by pivoting
// before gonum sees the problem, and gonum's phase I is replaced by the
// textbook one with artificial columns; see solveStandard and twoPhase for
// the failures of gonum's simplex that these avoid.
//
// Gonum returns no duals. Row duals are obtained by solving the dual of the
// standard-form problem, again with gonum's simplex, and mapping its
// solution back to the rows of the original problem in the convention of
// lp.Solution. The duals returned are an optimal dual solution (dual
// feasible, with the primal objective as dual objective, up to round-off);
// when the optimal dual is not unique, as in degenerate problems, they may
// differ from the basic dual solution that a simplex code such as CLP
// reports.
package gonumlp

import (
	"context"
	"errors"
	"fmt"
	"math"

	"github.com/pickwise/pickwise/lp"
)

// Solver solves problems with gonum's simplex. The zero value is ready to
// use.
type Solver struct {
	// Tol is the tolerance on reduced costs at which gonum's simplex stops;
	// 0 means 1e-10.
	Tol float64
	// NoDuals skips the second solve that computes the row duals;
	// Solution.RowDual is then nil.
	NoDuals bool
}

var _ lp.Solver = Solver{}

// Name returns "gonum".
func (Solver) Name() string { return "gonum" }

// column records how an original column is expressed by a standard-form
// column: x = off + sign*x'[a], with x'[a] free when the column is free, or
// x = off when it is fixed (a = -1).
type column struct {
	a    int
	off  float64
	sign float64
}

// Solve solves p and returns its optimum with row duals. It does not modify
// p. Solution.Iterations is 0: gonum does not report it. The context is
// checked before the primal and the dual solves; gonum's simplex itself
// cannot be interrupted.
func (s Solver) Solve(ctx context.Context, p *lp.Problem) (*lp.Solution, error) {
	if err := ctx.Err(); err != nil {
		return nil, fmt.Errorf("gonum: %w", err)
	}
	if err := p.Validate(); err != nil {
		return nil, fmt.Errorf("gonum: %w", err)
	}
	tol := s.Tol
	if tol == 0 {
		tol = 1e-10
	}
	sf, err := standardForm(p)
	if err != nil {
		return nil, err
	}
	x, rows, err := solveStandard(sf.c, sf.a, sf.b, sf.free, tol)
	if err != nil {
		return nil, err
	}
	if err := ctx.Err(); err != nil {
		return nil, fmt.Errorf("gonum: %w", err)
	}
	var y []float64
	if !s.NoDuals {
		if y, err = dualValues(sf, rows, tol); err != nil {
			return nil, err
		}
	}

	sol := &lp.Solution{X: make([]float64, p.NumCols())}
	if y != nil {
		sol.RowDual = make([]float64, p.NumRows())
	}
	for j, c := range sf.cols {
		if c.a < 0 {
			sol.X[j] = c.off
		} else {
			sol.X[j] = c.off + c.sign*x[c.a]
		}
		sol.Objective += p.Obj[j] * sol.X[j]
	}
	for i, k := range sf.rowOf {
		if k >= 0 && y != nil {
			sol.RowDual[i] = y[k]
		}
	}
	return sol, nil
}

// standard is a problem in gonum's standard form with the map back to the
// original problem.
type standard struct {
	c     []float64
	a     [][]float64 // dense rows
	b     []float64
	free  []bool // free columns; the others are >= 0
	cols  []column
	rowOf []int // standard row holding the structural part of each original row, or -1
}

// standardForm converts p. It returns a *lp.StatusError when a row without
// structural entries cannot meet its bounds.
func standardForm(p *lp.Problem) (*standard, error) {
	n := p.NumCols()
	sf := &standard{cols: make([]column, n), rowOf: make([]int, p.NumRows())}
	nc := 0 // standard columns so far
	newCol := func(cost float64) int {
		sf.c = append(sf.c, cost)
		sf.free = append(sf.free, false)
		nc++
		return nc - 1
	}
	type boundRow struct {
		col int
		rhs float64
	}
	var bounded []boundRow
	for j := range n {
		lo, up, cost := p.ColLo[j], p.ColUp[j], p.Obj[j]
		switch {
		case lo == up:
			sf.cols[j] = column{a: -1, off: lo}
		case !math.IsInf(lo, 0):
			sf.cols[j] = column{a: newCol(cost), off: lo, sign: 1}
			if !math.IsInf(up, 0) {
				bounded = append(bounded, boundRow{sf.cols[j].a, up - lo})
			}
		case !math.IsInf(up, 0):
			sf.cols[j] = column{a: newCol(-cost), off: up, sign: -1}
		default:
			sf.cols[j] = column{a: newCol(cost), sign: 1}
			sf.free[sf.cols[j].a] = true
		}
	}

	// Rows are collected sparsely (structural columns are known now,
	// slack columns are numbered as they are created) and made dense at
	// the end. Validate has ruled out repeated columns within a row.
	type entry struct {
		col int
		val float64
	}
	var rows [][]entry
	addRow := func(e []entry, rhs float64) int {
		rows = append(rows, e)
		sf.b = append(sf.b, rhs)
		return len(rows) - 1
	}
	for i := range p.NumRows() {
		sf.rowOf[i] = -1
		lo, up := p.RowLo[i], p.RowUp[i]
		if math.IsInf(lo, -1) && math.IsInf(up, 1) {
			continue // free row: no constraint, dual 0
		}
		var e []entry
		constant, scale := 0.0, 0.0
		for k := p.RowStart[i]; k < p.RowStart[i+1]; k++ {
			c, v := sf.cols[p.Index[k]], p.Value[k]
			if v == 0 {
				continue
			}
			constant += v * c.off
			scale += math.Abs(v * c.off)
			if c.a >= 0 {
				e = append(e, entry{c.a, c.sign * v})
			}
		}
		lo -= constant
		up -= constant
		if len(e) == 0 {
			// The row is a constant: check it and drop it.
			tol := 1e-9 * (1 + scale)
			if lo > tol || up < -tol {
				return nil, &lp.StatusError{Backend: "gonum", Status: lp.Infeasible,
					Detail: fmt.Sprintf("row %d is the constant %g, outside [%g, %g]", i, constant, p.RowLo[i], p.RowUp[i])}
			}
			continue
		}
		switch {
		case lo == up:
			sf.rowOf[i] = addRow(e, lo)
		case math.IsInf(lo, -1):
			sf.rowOf[i] = addRow(append(e, entry{newCol(0), 1}), up)
		case math.IsInf(up, 1):
			sf.rowOf[i] = addRow(append(e, entry{newCol(0), -1}), lo)
		default:
			s := newCol(0)
			sf.rowOf[i] = addRow(append(e, entry{s, -1}), lo)
			addRow([]entry{{s, 1}, {newCol(0), 1}}, up-lo)
		}
	}
	for _, br := range bounded {
		addRow([]entry{{br.col, 1}, {newCol(0), 1}}, br.rhs)
	}
	sf.a = make([][]float64, len(rows))
	for k, r := range rows {
		sf.a[k] = make([]float64, nc)
		for _, e := range r {
			sf.a[k][e.col] += e.val
		}
	}
	return sf, nil
}

// dualValues solves the dual of the standard-form problem restricted to
// the rows kept by solveStandard, and returns one dual value per standard
// row, zero for the rows left out.
//
// The dual of min cᵀx, Ax = b, x_j >= 0 (j not free) is max bᵀy subject to
// Aⱼᵀy <= cⱼ for the non-free columns and Aⱼᵀy = cⱼ for the free ones, with
// y free. A non-free column with a single nonzero and zero cost (a slack)
// only fixes the sign of its row's y, so it becomes a sign restriction
// instead of a dual row; the other inequalities get slacks zⱼ >= 0. The
// result is solved with solveStandard, the y left free being free columns
// there.
func dualValues(sf *standard, kept []int, tol float64) ([]float64, error) {
	y := make([]float64, len(sf.b))
	if len(kept) == 0 {
		return y, nil
	}
	canPos := make([]bool, len(kept))
	canNeg := make([]bool, len(kept))
	for r := range kept {
		canPos[r], canNeg[r] = true, true
	}
	var dualRows []int // standard columns that give dual rows
	for j := range sf.c {
		only, count := -1, 0
		for r, k := range kept {
			if sf.a[k][j] != 0 {
				only, count = r, count+1
			}
		}
		switch {
		case count == 0:
			// In no kept row: cⱼ >= 0 (or = 0 if free) holds at an
			// optimum, whatever y.
		case count == 1 && sf.c[j] == 0 && !sf.free[j]:
			if sf.a[kept[only]][j] > 0 {
				canPos[only] = false
			} else {
				canNeg[only] = false
			}
		default:
			dualRows = append(dualRows, j)
		}
	}
	// Columns of the dual: one per kept row whose y is not forced to 0
	// (y = sign*v), then one slack per non-free dual row.
	type yvar struct {
		row  int // index into kept
		sign float64
	}
	var ys []yvar
	var free []bool
	for r := range kept {
		switch {
		case canPos[r] && canNeg[r]:
			ys, free = append(ys, yvar{r, 1}), append(free, true)
		case canPos[r]:
			ys, free = append(ys, yvar{r, 1}), append(free, false)
		case canNeg[r]:
			ys, free = append(ys, yvar{r, -1}), append(free, false)
		}
	}
	nv := len(ys)
	for _, j := range dualRows {
		if !sf.free[j] {
			nv++
		}
	}
	c := make([]float64, nv)
	for q, v := range ys {
		c[q] = -v.sign * sf.b[kept[v.row]] // minimise -bᵀy
	}
	for len(free) < nv {
		free = append(free, false)
	}
	a := make([][]float64, len(dualRows))
	b := make([]float64, len(dualRows))
	z := len(ys)
	for i, j := range dualRows {
		a[i] = make([]float64, nv)
		for q, v := range ys {
			a[i][q] = v.sign * sf.a[kept[v.row]][j]
		}
		if !sf.free[j] {
			a[i][z] = 1
			z++
		}
		b[i] = sf.c[j]
	}
	v, _, err := solveStandard(c, a, b, free, tol)
	if err != nil {
		var se *lp.StatusError
		if errors.As(err, &se) {
			se.Detail = "solving the dual for row duals: " + se.Status.String() + detailSuffix(se.Detail)
			se.Status = lp.NumericalTrouble
		}
		return nil, err
	}
	for q, yv := range ys {
		y[kept[yv.row]] = yv.sign * v[q]
	}
	return y, nil
}

func detailSuffix(d string) string {
	if d == "" {
		return ""
	}
	return ": " + d
}

// Package lp holds a sparse linear program in row form and the Solver
// interface that its backends implement.
//
// A Problem is
//
//	minimise    Obj·x
//	subject to  RowLo[i] <= (A x)_i <= RowUp[i]
//	            ColLo[j] <= x_j     <= ColUp[j]
//
// with A stored row by row (compressed sparse rows). Infinite bounds are
// math.Inf(±1). Backends live in sub-packages: lp/clp (COIN-OR CLP through
// cgo, the default) and lp/gonumlp (gonum's pure-Go simplex, for small
// problems and as a reference in tests).
package lp

import (
	"context"
	"errors"
	"fmt"
	"math"
)

// Problem is a linear program with its constraint matrix in compressed
// sparse row form. The zero value is an empty problem; use AddCol and AddRow
// to build it.
type Problem struct {
	Obj          []float64 // objective coefficient per column
	ColLo, ColUp []float64 // column bounds

	RowStart []int     // row i has entries RowStart[i]:RowStart[i+1]; len = rows+1 (or 0 when empty)
	Index    []int32   // column index of each entry
	Value    []float64 // coefficient of each entry
	RowLo    []float64 // row lower bounds
	RowUp    []float64 // row upper bounds
}

// AddCol appends a column with objective coefficient obj and bounds
// [lo, up], and returns its index.
func (p *Problem) AddCol(obj, lo, up float64) int {
	p.Obj = append(p.Obj, obj)
	p.ColLo = append(p.ColLo, lo)
	p.ColUp = append(p.ColUp, up)
	return len(p.Obj) - 1
}

// AddRow appends the row lo <= sum_k val[k]*x[idx[k]] <= up and returns its
// index. Column indices must already exist and must not repeat in a row.
func (p *Problem) AddRow(idx []int, val []float64, lo, up float64) int {
	if len(p.RowStart) == 0 {
		p.RowStart = append(p.RowStart, 0)
	}
	for k, j := range idx {
		p.Index = append(p.Index, int32(j))
		p.Value = append(p.Value, val[k])
	}
	p.RowStart = append(p.RowStart, len(p.Index))
	p.RowLo = append(p.RowLo, lo)
	p.RowUp = append(p.RowUp, up)
	return len(p.RowLo) - 1
}

// NumCols returns the number of columns.
func (p *Problem) NumCols() int { return len(p.Obj) }

// NumRows returns the number of rows.
func (p *Problem) NumRows() int { return len(p.RowLo) }

// NumNonzeros returns the number of stored matrix entries.
func (p *Problem) NumNonzeros() int { return len(p.Index) }

// Validate checks that the problem is well formed: consistent lengths,
// row starts non-decreasing and inside the entry arrays, column indices in
// range and not repeated within a row, finite coefficients, no NaN, and
// lower bounds not above upper bounds.
func (p *Problem) Validate() error {
	n := len(p.Obj)
	if len(p.ColLo) != n || len(p.ColUp) != n {
		return fmt.Errorf("lp: %d columns but %d lower and %d upper bounds", n, len(p.ColLo), len(p.ColUp))
	}
	m := len(p.RowLo)
	if len(p.RowUp) != m {
		return fmt.Errorf("lp: %d row lower bounds but %d upper", m, len(p.RowUp))
	}
	if m > 0 && len(p.RowStart) != m+1 {
		return fmt.Errorf("lp: %d rows but %d row starts", m, len(p.RowStart))
	}
	if len(p.Index) != len(p.Value) {
		return fmt.Errorf("lp: %d indices but %d values", len(p.Index), len(p.Value))
	}
	if m > 0 && (p.RowStart[0] < 0 || p.RowStart[m] > len(p.Index)) {
		return fmt.Errorf("lp: row starts span [%d, %d], outside the %d entries", p.RowStart[0], p.RowStart[m], len(p.Index))
	}
	for i := 0; i < m; i++ {
		if p.RowStart[i] > p.RowStart[i+1] {
			return fmt.Errorf("lp: row %d: start %d after next start %d", i, p.RowStart[i], p.RowStart[i+1])
		}
	}
	for j := 0; j < n; j++ {
		if math.IsNaN(p.Obj[j]) || math.IsNaN(p.ColLo[j]) || math.IsNaN(p.ColUp[j]) || p.ColLo[j] > p.ColUp[j] {
			return fmt.Errorf("lp: column %d: bad objective or bounds [%g, %g]", j, p.ColLo[j], p.ColUp[j])
		}
	}
	var last []int // 1 + the last row in which each column was seen
	if m > 0 {
		last = make([]int, n)
	}
	for i := 0; i < m; i++ {
		if math.IsNaN(p.RowLo[i]) || math.IsNaN(p.RowUp[i]) || p.RowLo[i] > p.RowUp[i] {
			return fmt.Errorf("lp: row %d: bad bounds [%g, %g]", i, p.RowLo[i], p.RowUp[i])
		}
		for k := p.RowStart[i]; k < p.RowStart[i+1]; k++ {
			if int(p.Index[k]) < 0 || int(p.Index[k]) >= n {
				return fmt.Errorf("lp: row %d: column index %d out of range [0, %d)", i, p.Index[k], n)
			}
			if math.IsNaN(p.Value[k]) || math.IsInf(p.Value[k], 0) {
				return fmt.Errorf("lp: row %d: coefficient %g", i, p.Value[k])
			}
			if last[p.Index[k]] == i+1 {
				return fmt.Errorf("lp: row %d: column %d appears twice", i, p.Index[k])
			}
			last[p.Index[k]] = i + 1
		}
	}
	return nil
}

// Status is the outcome of a solve.
type Status int

// Solve outcomes.
const (
	Optimal Status = iota
	Infeasible
	Unbounded
	IterationLimit
	TimeLimit
	NumericalTrouble
	Unknown
)

// String returns a short description of the status.
func (s Status) String() string {
	switch s {
	case Optimal:
		return "optimal"
	case Infeasible:
		return "primal infeasible"
	case Unbounded:
		return "unbounded"
	case IterationLimit:
		return "stopped at the iteration limit"
	case TimeLimit:
		return "stopped at the time limit"
	case NumericalTrouble:
		return "numerical trouble"
	}
	return "unknown status"
}

// StatusError is returned by a Solver when the solve did not end optimal.
type StatusError struct {
	Backend string
	Status  Status
	Detail  string
}

func (e *StatusError) Error() string {
	if e.Detail != "" {
		return fmt.Sprintf("%s: solve ended %s: %s", e.Backend, e.Status, e.Detail)
	}
	return fmt.Sprintf("%s: solve ended %s", e.Backend, e.Status)
}

// ErrNotOptimal is matched by errors.Is for every StatusError.
var ErrNotOptimal = errors.New("lp: solve did not end optimal")

// Is reports whether target is ErrNotOptimal.
func (e *StatusError) Is(target error) bool { return target == ErrNotOptimal }

// Solution is the result of an optimal solve.
type Solution struct {
	Objective float64   // optimal objective value
	X         []float64 // primal value per column
	// RowDual holds one dual value per row, or nil when the backend gives
	// none. Convention (CLP's): RowDual[i] is the rate of change of the
	// optimal objective as the active bound of row i is raised. For a
	// minimisation, a row binding at its upper bound has RowDual <= 0 and a
	// row binding at its lower bound has RowDual >= 0.
	RowDual    []float64
	Iterations int
}

// Solver solves a Problem to optimality. Any outcome other than optimal is
// returned as a *StatusError.
type Solver interface {
	// Name returns a short name of the backend, as used on the command line.
	Name() string
	// Solve solves p. It must not modify p.
	Solve(ctx context.Context, p *Problem) (*Solution, error)
}

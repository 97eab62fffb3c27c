// Package clp solves linear programs with COIN-OR CLP through its C
// interface.
//
// The binding is thin: it loads an lp.Problem into a CLP model, runs one of
// CLP's simplex drivers, and reads back the primal solution, the row duals
// and the status. Solver solves one problem from scratch; Model keeps the
// CLP model loaded so that rows can be appended and the problem re-solved
// from the previous optimal basis, as constraint generation needs.
//
// Row duals are CLP's row prices, which follow the convention documented on
// lp.Solution: for a minimisation a row binding at its upper bound has a dual
// <= 0 and a row binding at its lower bound a dual >= 0, and the dual is the
// rate of change of the optimal objective as that bound is raised.
//
// CLP runs in the calling goroutine and cannot be interrupted once started.
// A context is checked before and after the solve, and its deadline, if any,
// caps CLP's own time limit.
package clp

/*
#cgo pkg-config: clp
#include <stdlib.h>
#include <coin/Clp_C_Interface.h>
*/
import "C"

import (
	"context"
	"fmt"

	"github.com/pickwise/pickwise/lp"
)

// Algorithm selects the CLP driver used for the first solve of a model.
// Re-solves after Model.AddRows always use the dual simplex from the
// previous basis.
type Algorithm int

// Algorithms. The zero value, Dual, is the dual simplex from the all-slack
// basis without presolve. On a minimax-regret LP of 9508 rows (most of
// them inequalities), 2772 columns and 263219 nonzeros it took 0.4 s,
// against 3.7 s for Primal and 15-17 s for the two presolving drivers,
// which also stopped 4e-7 above the optimum that Dual, Primal and GLPK
// agreed on. CLP's barrier is not offered: on the same LP it ran for 5
// minutes, past a 4-minute time limit.
const (
	Dual         Algorithm = iota // dual simplex, no presolve (CLP's Clp_dual)
	Primal                        // primal simplex, no presolve (Clp_primal)
	Automatic                     // CLP's general driver with presolve (Clp_initialSolve)
	DualPresolve                  // dual simplex after presolve (Clp_initialDualSolve)
)

// String returns the name of the algorithm.
func (a Algorithm) String() string {
	switch a {
	case Dual:
		return "dual"
	case Primal:
		return "primal"
	case Automatic:
		return "automatic"
	case DualPresolve:
		return "dual-presolve"
	}
	return fmt.Sprintf("Algorithm(%d)", int(a))
}

// Solver solves problems with CLP, one fresh CLP model per call. The zero
// value is ready to use: CLP silent, no time limit, dual simplex.
type Solver struct {
	// LogLevel is CLP's amount of printing on standard output: 0 none,
	// 1 final status only, up to 4 verbose.
	LogLevel int
	// MaxSeconds limits the time of each solve; 0 or negative means no
	// limit. A context deadline, if sooner, overrides it.
	MaxSeconds float64
	// Algorithm is the CLP driver to use.
	Algorithm Algorithm
	// PrimalTolerance and DualTolerance are CLP's feasibility tolerances
	// on the (scaled) primal and dual problems; 0 means CLP's default,
	// 1e-7.
	PrimalTolerance, DualTolerance float64
}

var _ lp.Solver = Solver{}

// Name returns "clp".
func (Solver) Name() string { return "clp" }

// Solve loads p into a new CLP model, solves it and frees the model. It does
// not modify p.
func (s Solver) Solve(ctx context.Context, p *lp.Problem) (*lp.Solution, error) {
	if err := ctx.Err(); err != nil {
		return nil, fmt.Errorf("clp: %w", err)
	}
	m, err := NewModel(p)
	if err != nil {
		return nil, err
	}
	defer m.Close()
	m.LogLevel = s.LogLevel
	m.MaxSeconds = s.MaxSeconds
	m.Algorithm = s.Algorithm
	m.PrimalTolerance = s.PrimalTolerance
	m.DualTolerance = s.DualTolerance
	return m.Solve(ctx)
}

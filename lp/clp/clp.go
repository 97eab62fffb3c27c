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
// Some of CLP's verdicts are checked before they are returned: on random
// LPs compared with gonum and GLPK, CLP 1.17 called unbounded problems
// infeasible or optimal-when-scaled, and gave up on some infeasible ones;
// Model.Solve re-runs the other simplex method from the final basis in
// those cases (see the comments there).
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
// Re-solves after Model.AddRows use Model.Resolve from the previous basis.
type Algorithm int

// Algorithms. The zero value, Primal, is the primal simplex from the
// all-slack basis without presolve.
//
// Measured on minimax-regret LPs (three channels; most rows inequalities,
// one equality row per table cell), seconds with tolerances 1e-7 / 1e-9:
//
//	rows    columns  nonzeros   Primal      Dual       Automatic
//	 9508     2772     263219   2.8 / 2.7   0.35 / 0.29
//	16372     4168     509821    22 / 18     1.4 / 38
//	34543     9140    2597188    61 / 63     577 / -    144 / 139
//
// The primal simplex is the robust choice: its time hardly depends on the
// tolerances and grew smoothly with size, while the dual simplex, much
// faster on mid-sized problems at loose tolerances, took 15000 iterations
// instead of 2400 at tolerance 1e-9 and 44000 on the largest problem. The
// presolving drivers were slower still and, at tolerance 1e-7, stopped
// further from the optimum. CLP's barrier is not offered: it ran for 5
// minutes on the smallest of these LPs, past a 4-minute time limit.
const (
	Primal       Algorithm = iota // primal simplex, no presolve (CLP's Clp_primal)
	Dual                          // dual simplex, no presolve (Clp_dual)
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
// value is ready to use: CLP silent, no time limit, primal simplex,
// tolerances 1e-9.
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
	// on the (scaled) primal and dual problems; 0 means DefaultTolerance.
	PrimalTolerance, DualTolerance float64
}

// DefaultTolerance is the primal and dual feasibility tolerance used when
// none is set. CLP's own default is 1e-7; on a regret LP of 16372 rows that
// left dual infeasibilities near 1e-7 and an objective 5e-7 (relative)
// above the one reached at 1e-9, where the dual infeasibilities were below
// 1e-9.
const DefaultTolerance = 1e-9

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

// Package result runs pickwise's main job end to end, from a discretized
// model to certified decision tables, and reads, writes and verifies the
// result file that carries them.
//
// Solve builds the exact LP of the model (lp/minimax), solves it with the
// chosen backend, snaps the optimal tables to dyadic probabilities, and
// certifies them in exact arithmetic: the upper bound is the exact
// worst-case regret of the snapped tables (the tables that are shipped),
// the lower bound the exact Bayes risk of the prior read from the LP's
// duals. It also evaluates the greedy and offset rules exactly.
package result

import (
	"context"
	"fmt"
	"math/big"
	"strconv"
	"time"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/lp"
	"github.com/pickwise/pickwise/lp/clp"
	"github.com/pickwise/pickwise/lp/minimax"
	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/exact"
)

// ProbBits is the number of binary digits of the shipped table
// probabilities and of the prior weights: both are multiples of
// 2^-ProbBits.
const ProbBits = 48

// Options control Solve.
type Options struct {
	// Solver is the LP backend; nil means CLP.
	Solver lp.Solver
	// MaxNonzeros refuses models whose LP is estimated to be larger
	// (0: minimax's default).
	MaxNonzeros float64
	// Reach widens the grouping distance T by this many steps (see
	// tables.Layout.Widen): a larger LP whose optimum is no higher.
	Reach int
}

// Figure is the exact worst-case regret of a rule.
type Figure struct {
	// Regret is the worst-case regret in steps, exactly.
	Regret *big.Rat
	// Worst is the configuration where it is reached, in steps
	// (tables.Far for channels far below the others).
	Worst []int
}

// Timing records where the time of a solve went.
type Timing struct {
	Build, Solve, Certify, Heuristics time.Duration
}

// Solution is everything Solve computes.
type Solution struct {
	Model  *discretize.Model
	Layout *tables.Layout

	// LP size and outcome.
	Solver                  string
	Rows, Columns, Nonzeros int
	Objective               float64 // LP optimum, in steps
	Iterations              int

	// Tables is the shipped optimal rule: probabilities are multiples of
	// 2^-ProbBits summing to exactly 1 in every cell.
	Tables *tables.Optimal
	// ProbBits is the binary precision of Tables and Weights.
	ProbBits uint

	// Prior is the least-favourable prior read from the duals: Configs[k]
	// has weight Weights[k] / 2^ProbBits; only positive weights are kept.
	Configs [][]int
	Weights []uint64

	// Lower and Upper are the exact bounds on the optimum, in steps.
	Lower, Upper *big.Rat
	// Optimal is the exact worst case of the shipped tables (Upper) and
	// its configuration.
	Optimal Figure
	// Greedy and Offset are the exact worst cases of the heuristics.
	Greedy, Offset Figure
	// OffsetHalf holds the offsets of the offset rule, in half steps.
	OffsetHalf []int

	Timing Timing
}

// Solve computes the certified optimal rule of m and the exact figures of
// the greedy and offset rules.
func Solve(ctx context.Context, m *discretize.Model, opt Options) (*Solution, error) {
	l, err := tables.NewLayout(m)
	if err != nil {
		return nil, err
	}
	if err := l.Widen(opt.Reach); err != nil {
		return nil, err
	}
	solver := opt.Solver
	if solver == nil {
		solver = clp.Solver{}
	}
	s := &Solution{Model: m, Layout: l, Solver: solver.Name(), ProbBits: ProbBits}

	t0 := time.Now()
	f, err := minimax.Build(l, minimax.Options{MaxNonzeros: opt.MaxNonzeros})
	if err != nil {
		return nil, err
	}
	s.Rows, s.Columns, s.Nonzeros = f.Problem.NumRows(), f.Problem.NumCols(), f.Problem.NumNonzeros()
	t1 := time.Now()
	sol, err := solver.Solve(ctx, f.Problem)
	if err != nil {
		return nil, fmt.Errorf("solving the LP (%d rows, %d columns, %d nonzeros): %w", s.Rows, s.Columns, s.Nonzeros, err)
	}
	s.Objective, s.Iterations = sol.Objective, sol.Iterations
	t2 := time.Now()
	s.Timing.Build, s.Timing.Solve = t1.Sub(t0), t2.Sub(t1)

	f.Apply(sol.X)
	s.Tables = exact.Snap(f.Tables, ProbBits)
	et, err := exact.NewTable(s.Tables, ProbBits)
	if err != nil {
		return nil, fmt.Errorf("snapped table: %w", err)
	}
	up := exact.WorstCase(l, et, l.D)
	s.Upper = up.Regret
	s.Optimal = Figure{Regret: up.Regret, Worst: up.Values}

	if sol.RowDual == nil {
		return nil, fmt.Errorf("the %s backend gave no dual solution: the lower bound needs one", solver.Name())
	}
	if prior := f.Prior(sol.RowDual); prior != nil {
		w, err := exact.SnapWeights(prior, ProbBits)
		if err != nil {
			return nil, err
		}
		for k, x := range w {
			if x != 0 {
				s.Configs = append(s.Configs, append([]int(nil), f.Config(k)...))
				s.Weights = append(s.Weights, x)
			}
		}
	}
	if s.Lower, err = lowerBound(l, s.Configs, s.Weights, ProbBits); err != nil {
		return nil, err
	}
	t3 := time.Now()
	s.Timing.Certify = t3.Sub(t2)

	g := exact.WorstCase(l, exact.Greedy(l.N()), l.D+GreedyWidth(l))
	s.Greedy = Figure{Regret: g.Regret, Worst: g.Values}
	s.OffsetHalf = l.OffsetHalfSteps()
	o := exact.WorstCase(l, exact.Offset(s.OffsetHalf), l.D+tables.OffsetWidth(s.OffsetHalf))
	s.Offset = Figure{Regret: o.Regret, Worst: o.Values}
	s.Timing.Heuristics = time.Since(t3)
	return s, nil
}

// GreedyWidth returns the widening, in steps, that evaluating the greedy
// rule needs on top of the layout's D: the largest bias lo_k - hi_j, at
// least 0 (design notes, "Heuristics").
func GreedyWidth(l *tables.Layout) int {
	w := 0
	for k := range l.Lo {
		for j := range l.Hi {
			w = max(w, l.Lo[k]-l.Hi[j])
		}
	}
	return w
}

// StepRat returns the step as an exact rational: the shortest decimal that
// reads back as the float64 step, so that a step of 0.1 is exactly 1/10.
func StepRat(step float64) *big.Rat {
	r, ok := new(big.Rat).SetString(strconv.FormatFloat(step, 'g', -1, 64))
	if !ok {
		return new(big.Rat).SetFloat64(step)
	}
	return r
}

// Units converts an exact figure in steps to reading units.
func Units(steps *big.Rat, step float64) *big.Rat {
	return new(big.Rat).Mul(steps, StepRat(step))
}

// Float returns the nearest float64 of r.
func Float(r *big.Rat) float64 {
	f, _ := r.Float64()
	return f
}

// lowerBound returns the exact Bayes risk of the prior, or 0 for an empty
// prior (every regret is at least 0: a valid, if weak, bound; it is the
// bound when the LP's duals all vanish, that is when the optimum is 0).
func lowerBound(l *tables.Layout, configs [][]int, w []uint64, bits uint) (*big.Rat, error) {
	if len(configs) == 0 {
		return new(big.Rat), nil
	}
	return exact.BayesRisk(l, configs, w, bits)
}

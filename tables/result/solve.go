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
	"math"
	"math/big"
	"slices"
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
	// Method is MethodAuto (the zero value), MethodDirect or MethodCG.
	Method string
	// TimeLimit, when positive, stops constraint generation after the
	// round that passes it; the result is certified all the same, with a
	// wider interval.
	TimeLimit time.Duration
	// Progress, when not nil, is called after each round of constraint
	// generation.
	Progress func(minimax.Progress)
	// NoPolish skips the second solve that, among the rules whose worst
	// case is the optimum, picks one with the smallest total regret over
	// all configurations. Polishing makes tables monotone and decisive
	// where the worst case leaves them free, and costs a second LP solve.
	NoPolish bool
	// NoSymmetry solves the LP without using that channels with identical
	// noise are interchangeable (minimax.Options.NoSymmetry); the answer
	// is the same, the LP larger.
	NoSymmetry bool
	// Master chooses how constraint generation solves the LP over its
	// working set: MasterDW (the zero value "" means it), by Dantzig–Wolfe
	// decomposition (lp/dw), or MasterCLP, the whole LP by CLP's simplex.
	Master string
}

// Ways of solving the working-set LP of constraint generation.
const (
	MasterDW  = "dw"
	MasterCLP = "clp"
)

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
	Build, Solve, Polish, Certify time.Duration
	// Heuristics is the time of the greedy and offset figures. They are
	// computed alongside the LP and the certificate (with constraint
	// generation and a time limit, alongside the certificate only), so
	// it overlaps the others.
	Heuristics time.Duration
}

// Solution is everything Solve computes.
type Solution struct {
	Model  *discretize.Model
	Layout *tables.Layout

	// LP size and outcome.
	Solver    string
	Method    string // direct or cg
	Converged bool   // false when constraint generation stopped early
	// ShippedGreedy reports that constraint generation stopped early with
	// a rule worse than greedy, so Tables hold greedy's tables instead.
	ShippedGreedy           bool
	Rounds                  int // rounds of constraint generation
	Rows, Columns, Nonzeros int
	Objective               float64 // LP optimum, in steps
	Iterations              int

	// Tables is the shipped optimal rule: probabilities are integers over
	// TableDen summing to exactly 1 in every cell.
	Tables *tables.Optimal
	// TableDen is the common denominator of the probabilities of Tables:
	// each is an integer over TableDen (see exact.Rationalize).
	TableDen uint64
	// ProbBits is the binary precision of the prior weights.
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

// Methods of solving the LP.
const (
	// MethodAuto uses the direct LP when its estimated size is small
	// (at most 2e6 nonzeros) and constraint generation otherwise.
	MethodAuto = "auto"
	// MethodDirect writes a row for every configuration.
	MethodDirect = "direct"
	// MethodCG generates rows for the binding configurations only; it
	// needs CLP.
	MethodCG = "cg"
)

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
		solver = clp.Solver{PrimalTolerance: tolerance, DualTolerance: tolerance}
	}
	method := opt.Method
	if method == "" || method == MethodAuto {
		method = MethodDirect
		if _, nz := minimax.Estimate(l); nz > 2e6 {
			method = MethodCG
		}
	}
	switch {
	case method != MethodDirect && method != MethodCG:
		return nil, fmt.Errorf("unknown method %q (want auto, direct or cg)", method)
	case method == MethodCG && opt.Master != "" && opt.Master != MasterDW && opt.Master != MasterCLP:
		return nil, fmt.Errorf("unknown working-set solver %q (want %s or %s)", opt.Master, MasterDW, MasterCLP)
	case method == MethodCG && solver.Name() != "clp":
		return nil, fmt.Errorf("constraint generation needs the clp backend, not %s", solver.Name())
	}
	s := &Solution{Model: m, Layout: l, Solver: solver.Name(), Method: method, ProbBits: ProbBits, Converged: true}
	// The offset rule's offsets: its figure, and the offsets of cells
	// that constraint generation leaves without columns.
	half := l.OffsetHalfSteps()

	// The exact figures of greedy and of the offset rule do not depend
	// on the LP: they are computed alongside it (start, once the LP is
	// known to be within reach), on the cores that the LP leaves idle
	// (CLP is serial). A return before they are taken waits for them,
	// so that no work outlives Solve.
	type figures struct {
		greedy, offset Figure
		took           time.Duration
		err            error
	}
	heur := make(chan figures, 1)
	started := false
	start := func() {
		started = true
		go func() {
			t := time.Now()
			var h figures
			h.greedy, h.offset, h.err = heuristics(l, half)
			h.took = time.Since(t)
			heur <- h
		}()
	}
	taken := false
	defer func() {
		if started && !taken {
			<-heur
		}
	}()

	var f *minimax.Formulation
	var sol *lp.Solution
	// near, when not nil, holds the configurations near the worst case
	// of f's rule, from constraint generation (minimax.CGResult.Near).
	var near [][]int
	var nearWorst float64
	t0 := time.Now()
	switch method {
	case MethodDirect:
		f, err = minimax.Build(l, minimax.Options{MaxNonzeros: opt.MaxNonzeros, NoSymmetry: opt.NoSymmetry})
		if err != nil {
			return nil, err
		}
		start()
		s.Rows, s.Columns, s.Nonzeros = f.Problem.NumRows(), f.Problem.NumCols(), f.Problem.NumNonzeros()
		t1 := time.Now()
		s.Timing.Build = t1.Sub(t0)
		sol, err = solver.Solve(ctx, f.Problem)
		if err != nil {
			return nil, fmt.Errorf("solving the LP (%d rows, %d columns, %d nonzeros): %w", s.Rows, s.Columns, s.Nonzeros, err)
		}
		s.Timing.Solve = time.Since(t1)
		f.Apply(sol.X)
		if !opt.NoPolish {
			t2 := time.Now()
			if x, err := polish(ctx, solver, f, sol.Objective); err == nil {
				f.Apply(x)
			}
			// A failed polish leaves the first solution, which is optimal.
			s.Timing.Polish = time.Since(t2)
		}
	case MethodCG:
		// Cells that no configuration of the working set reaches pick
		// as the offset rule does: on biased or unequal noise a far
		// better start, and a far better rule away from the working
		// set, than the highest reading.
		cg := minimax.CGOptions{Progress: opt.Progress, NoSymmetry: opt.NoSymmetry}
		if slices.ContainsFunc(half, func(h int) bool { return h != 0 }) {
			cg.Half = half
		}
		if opt.TimeLimit > 0 {
			cg.Deadline = t0.Add(opt.TimeLimit)
		}
		inner := newDWIncremental
		if opt.Master == MasterCLP {
			inner = newCLPIncremental(tolerance)
		}
		if opt.TimeLimit <= 0 {
			// With a time limit the figures wait, so that constraint
			// generation has every core within it (four channels with
			// 15-point pmfs and 90 s: 6 rounds alongside them, 7
			// alone, and a peak of 4.2 GiB instead of 3.0).
			start()
		}
		res, err := minimax.SolveCG(ctx, l, inner, cg)
		if err != nil {
			return nil, err
		}
		f, sol, near, nearWorst = res.F, res.Solution, res.Near, res.WorstCase
		s.Converged, s.Rounds = res.Converged, res.Rounds
		s.Rows, s.Columns, s.Nonzeros = f.Problem.NumRows(), f.Problem.NumCols(), f.Problem.NumNonzeros()
		s.Timing.Solve = time.Since(t0)
		if !started {
			// The figures waited for constraint generation, not for
			// the certificate (four channels with 15-point pmfs: the
			// two together took 6.3 s after constraint generation
			// instead of 7.0 s one after the other).
			start()
		}
	}
	s.Objective, s.Iterations = sol.Objective, sol.Iterations

	t2 := time.Now()
	if s.Tables, s.TableDen, s.Optimal, err = certifyTables(l, f.Tables, near, nearWorst); err != nil {
		return nil, fmt.Errorf("certifying the tables: %w", err)
	}
	if !s.Converged {
		// Stopped early, the LP's rule can be far worse than greedy
		// outside the configurations it has seen: ship greedy's tables
		// when their worst case is lower. The lower bound below holds
		// for every rule.
		greedy := GreedyTables(l)
		if !noBetter(l, greedy, near, s.Optimal.Regret) {
			gt, gden, gfig, err := certifyTables(l, greedy, nil, 0)
			if err != nil {
				return nil, fmt.Errorf("greedy tables: %w", err)
			}
			if gfig.Regret.Cmp(s.Optimal.Regret) < 0 {
				s.Tables, s.TableDen, s.Optimal = gt, gden, gfig
				s.ShippedGreedy = true
			}
		}
	}
	s.Upper = s.Optimal.Regret

	if sol.RowDual == nil {
		return nil, fmt.Errorf("the %s backend gave no dual solution: the lower bound needs one", solver.Name())
	}
	if configs, prior := f.PriorConfigs(sol.RowDual); prior != nil {
		w, err := exact.SnapWeights(prior, ProbBits)
		if err != nil {
			return nil, err
		}
		for k, x := range w {
			if x != 0 {
				s.Configs = append(s.Configs, configs[k])
				s.Weights = append(s.Weights, x)
			}
		}
	}
	if s.Lower, err = lowerBound(l, s.Configs, s.Weights, ProbBits); err != nil {
		return nil, err
	}
	s.Timing.Certify = time.Since(t2)

	s.OffsetHalf = half
	if !started {
		start()
	}
	h := <-heur
	taken = true
	if h.err != nil {
		return nil, h.err
	}
	s.Greedy, s.Offset, s.Timing.Heuristics = h.greedy, h.offset, h.took
	return s, nil
}

// certifyTables snaps the probabilities of o to exact fractions
// (exact.Rationalize) and returns the snapped tables, their common
// denominator and their exact worst case. near, when not nil, holds the
// configurations where the float regret of o comes within a relative
// minimax.NearRel of worst, its float worst case (minimax.CGResult.Near):
// when the snapped tables are close enough to o for that margin to cover
// them too (nearHolds), their exact worst case is that of these
// configurations alone, without a float screen of every configuration.
func certifyTables(l *tables.Layout, o *tables.Optimal, near [][]int, worst float64) (*tables.Optimal, uint64, Figure, error) {
	t, den, et, err := snapTables(o)
	if err != nil {
		return nil, 0, Figure{}, err
	}
	var w exact.Worst
	if len(near) > 0 && nearHolds(l, o, t, worst) {
		w = exact.WorstCaseAmong(l, et, near)
	} else if w, err = exact.WorstCaseScreened(l, et, l.D); err != nil {
		return nil, 0, Figure{}, err
	}
	return t, den, Figure{Regret: w.Regret, Worst: w.Values}, nil
}

// snapTables returns the tables o with exact fractions for probabilities
// (exact.Rationalize), their common denominator, and their exact rule.
func snapTables(o *tables.Optimal) (*tables.Optimal, uint64, *exact.Table, error) {
	t, den := exact.Rationalize(o, ProbBits)
	et, err := exact.NewTableDen(t, den)
	return t, den, et, err
}

// noBetter reports whether the exact worst case of tables o is at least
// w, from its exact regrets at the configurations near alone: the
// configurations where the rule that o is compared with is at its worst
// are likely where o is no better. False says nothing.
func noBetter(l *tables.Layout, o *tables.Optimal, near [][]int, w *big.Rat) bool {
	if len(near) == 0 {
		return false
	}
	_, _, et, err := snapTables(o)
	if err != nil {
		return false
	}
	return exact.WorstCaseAmong(l, et, near).Regret.Cmp(w) >= 0
}

// nearHolds reports whether the configurations that constraint generation
// found near the float worst case worst of o (minimax.CGResult.Near) hold
// every configuration that can reach the exact worst case of the snapped
// tables t. Where the probabilities of a cell move by a total of at most
// e from o to t, the regret of a configuration moves by at most e*s, s
// the largest regret of a channel, at most (n-1)*D steps (the values of a
// configuration differ by at most D steps from one to the next). A
// configuration left out had a float regret below (1-NearRel)*worst, so
// an exact regret under t of at most (1-NearRel)*worst*(1+r) + e*s, r the
// float evaluator's relative error (exact.ScreenTol); the configuration of
// the float worst case has one of at least worst*(1-r) - e*s under t. When the first is below the second,
// no configuration left out reaches the exact worst case of t.
func nearHolds(l *tables.Layout, o, t *tables.Optimal, worst float64) bool {
	if len(o.Tables) != len(t.Tables) || !(worst > 0) {
		return false
	}
	e := 0.0
	for i, a := range o.Tables {
		b := t.Tables[i]
		if a.Group != b.Group || len(a.Cells) != len(b.Cells) {
			return false
		}
		for c := range a.Cells {
			ca, cb := &a.Cells[c], &b.Cells[c]
			if !slices.Equal(ca.Diff, cb.Diff) || ca.Alive != cb.Alive || len(ca.P) != len(cb.P) {
				return false
			}
			d := 0.0
			for k := range ca.P {
				d += math.Abs(ca.P[k] - cb.P[k])
			}
			e = max(e, d)
		}
	}
	move := e * float64((l.N()-1)*l.D)
	left := (1-minimax.NearRel)*worst*(1+exact.ScreenTol) + move
	return left < worst*(1-exact.ScreenTol)-move
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

// polish re-solves the LP of f with the worst case held at the optimum t
// (plus a relative 1e-12) and the total regret over all configurations as
// the objective, and returns the new solution's columns.
func polish(ctx context.Context, solver lp.Solver, f *minimax.Formulation, t float64) ([]float64, error) {
	p := *f.Problem
	p.Obj = make([]float64, len(f.Problem.Obj))
	p.ColUp = append([]float64(nil), f.Problem.ColUp...)
	p.ColUp[0] = t*(1+1e-12) + 1e-15
	for _, row := range f.RowOf {
		for e := p.RowStart[row]; e < p.RowStart[row+1]; e++ {
			if j := p.Index[e]; j != 0 {
				p.Obj[j] += p.Value[e]
			}
		}
	}
	// Normalise the objective so that tolerances mean the same on every
	// model.
	var big float64
	for _, c := range p.Obj {
		big = math.Max(big, math.Abs(c))
	}
	if big > 0 {
		for j := range p.Obj {
			p.Obj[j] /= big
		}
	}
	sol, err := solver.Solve(ctx, &p)
	if err != nil {
		return nil, err
	}
	return sol.X, nil
}

// tolerance is the primal and dual feasibility tolerance of CLP solves:
// tighter than CLP's default of 1e-7, so that the LP optimum, the table
// and the prior are accurate well beyond the certificate's 1e-9.
const tolerance = 1e-9

// heuristics returns the exact figures of greedy and of the offset rule
// with offsets half (l.OffsetHalfSteps()).
func heuristics(l *tables.Layout, half []int) (greedy Figure, offset Figure, err error) {
	g, err := exact.WorstCaseScreened(l, exact.Greedy(l.N()), l.D+GreedyWidth(l))
	if err != nil {
		return
	}
	greedy = Figure{Regret: g.Regret, Worst: g.Values}
	o, err := exact.WorstCaseScreened(l, exact.Offset(half), l.D+tables.OffsetWidth(half))
	if err != nil {
		return
	}
	offset = Figure{Regret: o.Regret, Worst: o.Values}
	return
}

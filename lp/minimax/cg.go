package minimax

import (
	"context"
	"fmt"
	"math"
	"sort"
	"time"

	"github.com/pickwise/pickwise/lp"
	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/fast"
)

// Incremental is an LP model that keeps its basis between solves: rows
// added after a solve are handled from the previous basis (the dual simplex
// warm start of CLP, for example).
type Incremental interface {
	// AddRows appends the rows of p (its columns are ignored; the column
	// indices must exist in the model).
	AddRows(p *lp.Problem) error
	// Solve solves the model from its current basis.
	Solve(ctx context.Context) (*lp.Solution, error)
	// Close frees the model.
	Close()
}

// CGOptions control constraint generation.
type CGOptions struct {
	// Tol is the relative tolerance of the stopping test: stop when no
	// configuration's regret exceeds the LP value by more than
	// Tol*(LP value) + 1e-12 steps. Zero means 1e-10.
	Tol float64
	// Batch is the number of most violated configurations added per
	// subset and round; zero means 32.
	Batch int
	// MaxRounds stops after this many rounds (zero: 1000).
	MaxRounds int
	// Deadline, when not zero, stops the loop after the round that passes
	// it; the result then holds the best rule found, with Converged false.
	Deadline time.Time
	// Progress, when not nil, is called after every round.
	Progress func(Progress)
	// Evaluator evaluates rules at every configuration.
	Evaluator fast.Evaluator
}

// Progress reports one round of constraint generation, in steps.
type Progress struct {
	Round      int
	Configs    int     // configurations in the working set
	LPValue    float64 // optimum over the working set: a lower bound on the restricted optimum
	WorstCase  float64 // worst case of the current rule: an upper bound
	Violations int     // configurations above the LP value by more than the tolerance
	Elapsed    time.Duration
}

// CGResult is the outcome of SolveCG.
type CGResult struct {
	// F is the final formulation: its rows are the working set; its
	// tables (after Apply of Solution.X, done by SolveCG) hold the rule.
	F        *Formulation
	Solution *lp.Solution
	// WorstCase is the fast evaluator's worst case of the final rule,
	// in steps.
	WorstCase float64
	Rounds    int
	Converged bool
}

// allCells adds a column for every cell of every group of the layout: every
// vector of reading differences, within the group's span, whose sorted
// readings are joined by gaps of at most T and that leaves at least two
// channels not certainly below another.
func (f *Formulation) allCells() {
	l := f.Layout
	n := l.N()
	r := make([]int, n)
	for _, g := range tables.Subsets(n) {
		mem := g.Members()
		m := len(mem)
		span := l.T * (m - 1)
		for i := range r {
			r[i] = tables.Far
		}
		r[mem[0]] = 0
		var rec func(k int)
		rec = func(k int) {
			if k == m {
				if l.TopGroup(r, f.order) != g {
					return
				}
				if alive := l.Alive(g, r); alive.Len() >= 2 {
					f.addCell(g, alive, r)
				}
				return
			}
			for d := -span; d <= span; d++ {
				r[mem[k]] = d
				rec(k + 1)
			}
		}
		rec(1)
	}
}

// SolveCG solves the LP of layout l by constraint generation: it solves
// over a working set of configurations, evaluates the resulting rule at
// every configuration with the fast evaluator, adds the most violated ones,
// and re-solves from the previous basis, until no configuration's regret
// exceeds the LP value by more than the tolerance. Every cell has a column
// from the start, so the rule is defined everywhere.
func SolveCG(ctx context.Context, l *tables.Layout, newModel func(*lp.Problem) (Incremental, error), opt CGOptions) (*CGResult, error) {
	start := time.Now()
	tol := opt.Tol
	if tol == 0 {
		tol = 1e-10
	}
	batch := opt.Batch
	if batch == 0 {
		batch = 32
	}
	maxRounds := opt.MaxRounds
	if maxRounds == 0 {
		maxRounds = 1000
	}
	n := l.N()
	f := newFormulation(l)
	f.allCells()
	f.addCellRows()
	inSet := make(map[string]bool)
	key := func(v []int) string { return fmt.Sprint(v) }

	// pending collects the rows of configurations to add.
	pending := &lp.Problem{}
	var idx []int
	var val []float64
	add := func(v []int) error {
		k := key(v)
		if inSet[k] {
			return nil
		}
		inSet[k] = true
		var forced float64
		var err error
		idx, val, forced, err = f.regretRow(v, false, idx, val)
		if err != nil {
			return err
		}
		idx = append(idx, 0)
		val = append(val, -1)
		row := f.Problem.AddRow(idx, val, math.Inf(-1), -forced)
		pending.AddRow(idx, val, math.Inf(-1), -forced)
		f.RowOf = append(f.RowOf, row)
		f.Configs = append(f.Configs, v...)
		return nil
	}

	// worst collects, per subset, the configurations of rule with the
	// largest regrets above threshold, most violated first.
	type scored struct {
		v   []int
		reg float64
		seq int
	}
	worst := func(rule tables.Rule, threshold float64) ([]scored, float64, int, error) {
		var out []scored
		top := 0.0
		count := 0
		for _, q := range tables.Subsets(n) {
			var list []scored
			seq := 0
			err := opt.Evaluator.Regrets(l, rule, q, l.D, func(v []int, reg float64) {
				seq++
				top = math.Max(top, reg)
				if reg > threshold && !inSet[key(v)] {
					list = append(list, scored{append([]int(nil), v...), reg, seq})
				}
			})
			if err != nil {
				return nil, 0, 0, err
			}
			count += len(list)
			sort.Slice(list, func(a, b int) bool {
				if list[a].reg != list[b].reg {
					return list[a].reg > list[b].reg
				}
				return list[a].seq < list[b].seq
			})
			if len(list) > batch {
				list = list[:batch]
			}
			out = append(out, list...)
		}
		return out, top, count, nil
	}

	// The initial working set: the worst configurations of greedy.
	init, _, _, err := worst(tables.Greedy{}, -1)
	if err != nil {
		return nil, err
	}
	for _, s := range init {
		if err := add(s.v); err != nil {
			return nil, err
		}
	}
	// The model starts with the cell rows and the initial regret rows.
	model, err := newModel(f.Problem)
	if err != nil {
		return nil, err
	}
	defer model.Close()
	pending = &lp.Problem{}

	res := &CGResult{F: f}
	for round := 1; ; round++ {
		sol, err := model.Solve(ctx)
		if err != nil {
			return nil, fmt.Errorf("constraint generation, round %d (%d configurations): %w", round, f.NumConfigs(), err)
		}
		f.Apply(sol.X)
		threshold := sol.Objective*(1+tol) + 1e-12
		viol, top, count, err := worst(f.Tables, threshold)
		if err != nil {
			return nil, err
		}
		res.Solution, res.WorstCase, res.Rounds = sol, top, round
		if opt.Progress != nil {
			opt.Progress(Progress{Round: round, Configs: f.NumConfigs(), LPValue: sol.Objective,
				WorstCase: top, Violations: count, Elapsed: time.Since(start)})
		}
		if len(viol) == 0 {
			res.Converged = true
			return res, nil
		}
		if round >= maxRounds || (!opt.Deadline.IsZero() && time.Now().After(opt.Deadline)) {
			return res, nil
		}
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		for _, s := range viol {
			if err := add(s.v); err != nil {
				return nil, err
			}
		}
		if err := model.AddRows(pending); err != nil {
			return nil, err
		}
		pending = &lp.Problem{}
	}
}

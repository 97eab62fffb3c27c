package dw_test

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"testing"

	"github.com/pickwise/pickwise/lp"
	"github.com/pickwise/pickwise/lp/dw"
	"github.com/pickwise/pickwise/lp/gonumlp"
)

// program is a random minimax program of the package's form, kept as
// parts so that it can be loaded whole or in two steps.
type program struct {
	blocks [][]int     // columns of each block
	mult   [][]float64 // their coefficients in the block row
	rows   []linkRow
	ncols  int // t included
}

type linkRow struct {
	idx []int
	val []float64
	b   float64
}

// randomProgram returns a program with nb blocks of 1 to 4 columns (some
// with coefficient 2 in their block row, as shared columns have) and nl
// linking rows; row k only reaches blocks below reach(k), so that rows
// added later can bring new blocks.
func randomProgram(rng *rand.Rand, nb, nl int, reach func(k int) int) *program {
	p := &program{ncols: 1}
	for range nb {
		var cols []int
		var mult []float64
		for range 1 + rng.IntN(4) {
			cols = append(cols, p.ncols)
			p.ncols++
			m := 1.0
			if rng.IntN(5) == 0 {
				m = 2
			}
			mult = append(mult, m)
		}
		p.blocks = append(p.blocks, cols)
		p.mult = append(p.mult, mult)
	}
	for k := range nl {
		var r linkRow
		for b := range reach(k) {
			if rng.IntN(3) == 0 {
				continue
			}
			for _, j := range p.blocks[b] {
				if rng.IntN(2) == 0 {
					r.idx = append(r.idx, j)
					r.val = append(r.val, 3*rng.Float64())
				}
			}
		}
		r.b = -rng.Float64()
		p.rows = append(p.rows, r)
	}
	return p
}

// problem returns the columns up to ncols and the given rows and blocks
// as an lp.Problem (columns from first on only when first > 0: a batch).
func (p *program) problem(first, ncols int, rows []linkRow, blocks []int) *lp.Problem {
	q := &lp.Problem{}
	if first == 0 {
		q.AddCol(1, 0, math.Inf(1))
		first = 1
	}
	for j := first; j < ncols; j++ {
		q.AddCol(0, 0, math.Inf(1))
	}
	for _, r := range rows {
		idx := append([]int{0}, r.idx...)
		val := append([]float64{-1}, r.val...)
		q.AddRow(idx, val, math.Inf(-1), r.b)
	}
	for _, b := range blocks {
		q.AddRow(p.blocks[b], p.mult[b], 1, 1)
	}
	return q
}

func seq(n int) []int {
	s := make([]int, n)
	for i := range s {
		s[i] = i
	}
	return s
}

// checkSolution checks that sol is feasible for p with linking rows up
// to sol.Objective (within tol), that some row reaches it, and that the
// prior in its duals proves it: the least expected row value over all
// feasible x, computed block by block here, is within tol of it.
func checkSolution(t *testing.T, p *program, sol *lp.Solution, tol float64) {
	t.Helper()
	x := sol.X
	for b, cols := range p.blocks {
		s := 0.0
		for k, j := range cols {
			if x[j] < -1e-12 {
				t.Fatalf("x[%d] = %g", j, x[j])
			}
			s += p.mult[b][k] * x[j]
		}
		if math.Abs(s-1) > 1e-9 {
			t.Fatalf("block %d sums to %g", b, s)
		}
	}
	top := math.Inf(-1)
	for k, r := range p.rows {
		v := -r.b
		for e, j := range r.idx {
			v += r.val[e] * x[j]
		}
		if v > sol.Objective+tol {
			t.Errorf("row %d: %g above the optimum %g", k, v, sol.Objective)
		}
		top = math.Max(top, v)
	}
	if math.Abs(top-sol.Objective) > tol {
		t.Errorf("largest row %g, optimum %g", top, sol.Objective)
	}
	// The prior's lower bound.
	nb := len(p.blocks)
	cost := make([]float64, p.ncols)
	var lb, mass float64
	for k, r := range p.rows {
		w := -sol.RowDual[k]
		if w < -1e-12 {
			t.Fatalf("row %d: prior weight %g", k, w)
		}
		mass += w
		lb -= w * r.b
		for e, j := range r.idx {
			cost[j] += w * r.val[e]
		}
	}
	for b := range nb {
		best := math.Inf(1)
		for k, j := range p.blocks[b] {
			best = math.Min(best, cost[j]/p.mult[b][k])
		}
		lb += best
	}
	if math.Abs(mass-1) > 1e-9 {
		t.Errorf("prior weights sum to %g", mass)
	}
	if lb < sol.Objective-tol {
		t.Errorf("prior's lower bound %g below the optimum %g", lb, sol.Objective)
	}
}

// TestAgainstGonum solves random programs by decomposition and compares
// the optimum with gonum's simplex (gonum.org/v1/gonum/optimize/convex/lp,
// a general-purpose reference solver) on the whole program.
func TestAgainstGonum(t *testing.T) {
	for _, tc := range []struct {
		name      string
		seed      uint64
		nb, nl    int
		smoothing float64
		prefer    bool
		parts     int
		maxCuts   int // a small master: pruned and rebuilt within the solve
	}{
		{"small", 1, 4, 3, 0, false, 0, 0},
		{"more rows than blocks", 2, 5, 20, 0, false, 0, 0},
		{"many blocks", 3, 40, 12, 0, false, 0, 0},
		{"plain cutting planes", 4, 30, 15, -1, false, 0, 0},
		{"heavy smoothing", 5, 30, 15, 0.9, false, 0, 0},
		{"fixed smoothing", 14, 30, 15, 0.5, true, 3, 0},
		{"one row", 6, 10, 1, 0, false, 0, 0},
		{"preferred columns", 7, 30, 15, 0, true, 0, 0},
		{"preferred columns, many rows", 8, 20, 40, 0, true, 0, 0},
		{"parts", 9, 30, 15, 0, false, 4, 0},
		{"parts and preferred columns", 10, 30, 25, 0, true, 3, 0},
		{"a part per column", 11, 12, 10, 0, true, 1000, 0},
		{"a small master", 12, 40, 30, 0, false, 0, 8},
		{"a small master, parts and preferred columns", 13, 40, 30, 0, true, 3, 24},
	} {
		t.Run(tc.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(tc.seed, 7))
			p := randomProgram(rng, tc.nb, tc.nl, func(int) int { return tc.nb })
			q := p.problem(0, p.ncols, p.rows, seq(tc.nb))
			ref, err := gonumlp.Solver{}.Solve(context.Background(), q)
			if err != nil {
				t.Fatal(err)
			}
			m, err := dw.New(q)
			if err != nil {
				t.Fatal(err)
			}
			defer m.Close()
			m.Smoothing = tc.smoothing
			if tc.prefer {
				m.Prefer(func(col int) float64 { return float64(col % 3) })
			}
			if tc.parts > 0 {
				m.Parts(func(col int) int { return col % tc.parts })
			}
			m.MaxCuts = tc.maxCuts
			sol, err := m.Solve(context.Background())
			if err != nil {
				t.Fatal(err)
			}
			if n := dw.Rebuilds(m); (tc.maxCuts > 0) != (n > 1) {
				t.Errorf("the master was built %d times with at most %d cuts", n, tc.maxCuts)
			}
			if math.Abs(sol.Objective-ref.Objective) > 1e-9*math.Max(1, math.Abs(ref.Objective)) {
				t.Errorf("optimum %.12g, gonum %.12g", sol.Objective, ref.Objective)
			}
			checkSolution(t, p, sol, 1e-9)
		})
	}
}

// TestIncremental adds columns, linking rows and blocks after a solve and
// checks the next solve against a model loaded whole.
func TestIncremental(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 3))
	const nb, nl = 30, 24
	// The first half of the rows reach the first 15 blocks only.
	p := randomProgram(rng, nb, nl, func(k int) int {
		if k < nl/2 {
			return 15
		}
		return nb
	})
	split := p.blocks[15][0]
	m, err := dw.New(p.problem(0, split, p.rows[:nl/2], seq(15)))
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()
	// Parts whose blocks come in both steps.
	m.Parts(func(col int) int { return col % 3 })
	first, err := m.Solve(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	batch := p.problem(split, p.ncols, p.rows[nl/2:], seq(nb)[15:])
	if err := m.AddColumns(batch.ColLo, batch.ColUp, batch.Obj); err != nil {
		t.Fatal(err)
	}
	if err := m.AddRows(batch); err != nil {
		t.Fatal(err)
	}
	sol, err := m.Solve(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	whole, err := dw.New(p.problem(0, p.ncols, p.rows, seq(nb)))
	if err != nil {
		t.Fatal(err)
	}
	defer whole.Close()
	want, err := whole.Solve(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(sol.Objective-want.Objective) > 1e-9 {
		t.Errorf("after adding rows: optimum %.12g, loaded whole %.12g", sol.Objective, want.Objective)
	}
	if sol.Objective < first.Objective-1e-9 {
		t.Errorf("optimum fell from %g to %g when rows were added", first.Objective, sol.Objective)
	}
	// Block rows come after the linking rows in the batch, so the
	// solution's rows are the linking rows in order, then the blocks.
	var dual []float64
	dual = append(dual, sol.RowDual[:nl/2]...)
	dual = append(dual, sol.RowDual[nl/2+15:nl/2+15+nl/2]...)
	checkSolution(t, p, &lp.Solution{Objective: sol.Objective, X: sol.X, RowDual: dual}, 1e-9)
}

// TestBadForm checks that programs not of the package's form are refused.
func TestBadForm(t *testing.T) {
	good := func() *lp.Problem {
		q := &lp.Problem{}
		q.AddCol(1, 0, math.Inf(1))
		q.AddCol(0, 0, math.Inf(1))
		q.AddCol(0, 0, math.Inf(1))
		q.AddRow([]int{0, 1}, []float64{-1, 2}, math.Inf(-1), 0)
		q.AddRow([]int{1, 2}, []float64{1, 1}, 1, 1)
		return q
	}
	for _, tc := range []struct {
		name  string
		spoil func(q *lp.Problem)
	}{
		{"t costs 2", func(q *lp.Problem) { q.Obj[0] = 2 }},
		{"x has a cost", func(q *lp.Problem) { q.Obj[1] = 1 }},
		{"x has an upper bound", func(q *lp.Problem) { q.ColUp[2] = 1 }},
		{"t's coefficient", func(q *lp.Problem) { q.Value[0] = -2 }},
		{"linking row with a lower bound", func(q *lp.Problem) { q.RowLo[0] = -5 }},
		{"block row not equal to 1", func(q *lp.Problem) { q.RowLo[1], q.RowUp[1] = 2, 2 }},
		{"negative block coefficient", func(q *lp.Problem) { q.Value[3] = -1 }},
		{"column in two blocks", func(q *lp.Problem) { q.AddRow([]int{2}, []float64{1}, 1, 1) }},
	} {
		t.Run(tc.name, func(t *testing.T) {
			q := good()
			tc.spoil(q)
			m, err := dw.New(q)
			if err == nil {
				_, err = m.Solve(context.Background())
				m.Close()
			}
			if err == nil {
				t.Error("no error")
			}
		})
	}
	// And a column left out of every block.
	q := good()
	q.AddCol(0, 0, math.Inf(1))
	m, err := dw.New(q)
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()
	if _, err := m.Solve(context.Background()); err == nil {
		t.Error("a column in no block: no error")
	}
}

// TestProcessors checks that a solve gives the same bits whatever the
// number of processors (pricing and row values are shared out between
// them), and that rows whose entries are not in column order solve as
// the same rows in order.
func TestProcessors(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 5))
	const nb, nl = 3000, 40
	p := randomProgram(rng, nb, nl, func(int) int { return nb })
	sorted := p.problem(0, p.ncols, p.rows, seq(nb))
	shuffled := p.problem(0, p.ncols, p.rows, seq(nb))
	for i := range nl { // the linking rows; block rows keep their order
		idx := shuffled.Index[shuffled.RowStart[i]:shuffled.RowStart[i+1]]
		val := shuffled.Value[shuffled.RowStart[i]:shuffled.RowStart[i+1]]
		rng.Shuffle(len(idx), func(a, b int) {
			idx[a], idx[b] = idx[b], idx[a]
			val[a], val[b] = val[b], val[a]
		})
	}
	solve := func(q *lp.Problem, procs int) *lp.Solution {
		t.Helper()
		defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(procs))
		m, err := dw.New(q)
		if err != nil {
			t.Fatal(err)
		}
		defer m.Close()
		m.Parts(func(col int) int { return col % 5 })
		sol, err := m.Solve(context.Background())
		if err != nil {
			t.Fatal(err)
		}
		return sol
	}
	want := solve(sorted, 1)
	checkSolution(t, p, want, 1e-9)
	for _, tc := range []struct {
		name  string
		q     *lp.Problem
		procs int
	}{
		{"four processors", sorted, 4},
		{"entries out of order", shuffled, 1},
		{"entries out of order, three processors", shuffled, 3},
	} {
		t.Run(tc.name, func(t *testing.T) {
			got := solve(tc.q, tc.procs)
			if got.Objective != want.Objective || !slices.Equal(got.X, want.X) || !slices.Equal(got.RowDual, want.RowDual) {
				t.Errorf("optimum %.17g, one processor in order %.17g; or the mixture or prior differs", got.Objective, want.Objective)
			}
		})
	}
}

// TestFinerThanMaster asks for a tolerance (1e-16) finer than the master's
// simplex resolves: the solve must end, not loop until MaxIterations, with
// an optimum its prior proves within 1e-10 of it, relative (the master's
// tolerances). (Seeds 2 and 3 of these
// programs sat at relative gaps of about 3e-16, the master taking no
// iteration, before the solve ended on a master that no longer moves.)
func TestFinerThanMaster(t *testing.T) {
	for _, seed := range []uint64{2, 3} {
		t.Run(fmt.Sprint("seed ", seed), func(t *testing.T) {
			rng := rand.New(rand.NewPCG(seed, 7))
			p := randomProgram(rng, 300, 200, func(int) int { return 300 })
			m, err := dw.New(p.problem(0, p.ncols, p.rows, seq(300)))
			if err != nil {
				t.Fatal(err)
			}
			defer m.Close()
			m.Tol = 1e-16
			m.MaxIterations = 2000
			m.Parts(func(col int) int { return col % 5 })
			sol, err := m.Solve(context.Background())
			if err != nil {
				t.Fatal(err)
			}
			checkSolution(t, p, sol, 1e-10*sol.Objective)
		})
	}
}

// TestNoBlocks: a program of t alone (every linking row is t >= -b) has
// the largest -b as its optimum.
func TestNoBlocks(t *testing.T) {
	q := &lp.Problem{}
	q.AddCol(1, 0, math.Inf(1))
	q.AddRow([]int{0}, []float64{-1}, math.Inf(-1), -2)
	q.AddRow([]int{0}, []float64{-1}, math.Inf(-1), -3.5)
	m, err := dw.New(q)
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()
	sol, err := m.Solve(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(sol.Objective-3.5) > 1e-9 {
		t.Errorf("optimum %g, want 3.5", sol.Objective)
	}
}

// TestCostsByRow: pricing reads a prior that weighs few rows row by row,
// and must get the same bits as the pass over every column's entries,
// whatever the order of the rows' entries and with rows merged in two
// batches.
func TestCostsByRow(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 13))
	const nb, nl = 5000, 60
	p := randomProgram(rng, nb, nl, func(k int) int {
		if k < nl/2 {
			return nb / 2
		}
		return nb
	})
	for _, r := range p.rows {
		for e := range r.val {
			if rng.IntN(4) == 0 {
				r.val[e] = -r.val[e]
			}
		}
		rng.Shuffle(len(r.idx), func(a, b int) {
			r.idx[a], r.idx[b] = r.idx[b], r.idx[a]
			r.val[a], r.val[b] = r.val[b], r.val[a]
		})
	}
	var half []int
	for b := range nb / 2 {
		half = append(half, b)
	}
	first := p.blocks[nb/2][0] // the first column of the second half
	m, err := dw.New(p.problem(0, first, p.rows[:nl/2], half))
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()
	for _, tc := range []struct {
		name string
		rows int // rows loaded before the costs are read
		keep int // one row in keep has weight
	}{
		{"first batch, one row in ten", nl / 2, 10},
		{"both batches, one row in ten", nl, 10},
		{"both batches, one row in three", nl, 3},
		{"both batches, every row", nl, 1},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if tc.rows > dw.NumLinkingRows(m) {
				var rest []int
				for b := nb / 2; b < nb; b++ {
					rest = append(rest, b)
				}
				q := p.problem(first, p.ncols, p.rows[nl/2:], rest)
				if err := m.AddColumns(q.ColLo, q.ColUp, q.Obj); err != nil {
					t.Fatal(err)
				}
				if err := m.AddRows(q); err != nil {
					t.Fatal(err)
				}
			}
			w := make([]float64, tc.rows)
			for v := range w {
				if rng.IntN(tc.keep) == 0 {
					w[v] = rng.Float64()
				}
			}
			byCol := dw.ColumnCosts(m, w, false)
			byRow := dw.ColumnCosts(m, w, true)
			nonzero := 0
			for j := range byCol {
				if math.Float64bits(byRow[j]) != math.Float64bits(byCol[j]) {
					t.Fatalf("column %d: %.17g row by row, %.17g column by column", j, byRow[j], byCol[j])
				}
				if byCol[j] != 0 {
					nonzero++
				}
			}
			if nonzero == 0 {
				t.Fatal("every cost is zero: the test reads nothing")
			}
		})
	}
}

// TestCosts solves random programs with column costs, changing them
// between solves of one model (and back to none), and compares each
// optimum with gonum's simplex on the whole program with those costs
// (gonum.org/v1/gonum/optimize/convex/lp, a general-purpose reference
// solver). t must come out as the largest row.
func TestCosts(t *testing.T) {
	for _, tc := range []struct {
		name   string
		seed   uint64
		nb, nl int
		parts  int
		prefer bool
	}{
		{"one part", 21, 30, 15, 0, false},
		{"parts and preferred columns", 22, 40, 25, 3, true},
		{"a part per column", 23, 12, 10, 1000, true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(tc.seed, 5))
			p := randomProgram(rng, tc.nb, tc.nl, func(int) int { return tc.nb })
			q := p.problem(0, p.ncols, p.rows, seq(tc.nb))
			m, err := dw.New(q)
			if err != nil {
				t.Fatal(err)
			}
			defer m.Close()
			if tc.parts > 0 {
				m.Parts(func(col int) int { return col % tc.parts })
			}
			if tc.prefer {
				m.Prefer(func(col int) float64 { return float64(col % 3) })
			}
			random := func(scale float64) []float64 {
				c := make([]float64, p.ncols)
				for j := 1; j < len(c); j++ {
					if rng.IntN(3) > 0 {
						c[j] = scale * rng.Float64()
					}
				}
				return c
			}
			for step, c := range [][]float64{random(0.3), random(0.01), nil, random(0.1)} {
				if err := m.SetCosts(c); err != nil {
					t.Fatal(err)
				}
				sol, err := m.Solve(context.Background())
				if err != nil {
					t.Fatal(err)
				}
				wq := p.problem(0, p.ncols, p.rows, seq(tc.nb))
				copy(wq.Obj[1:], c[min(1, len(c)):])
				ref, err := gonumlp.Solver{}.Solve(context.Background(), wq)
				if err != nil {
					t.Fatal(err)
				}
				if math.Abs(sol.Objective-ref.Objective) > 1e-9*math.Max(1, math.Abs(ref.Objective)) {
					t.Errorf("step %d: optimum %.12g, gonum %.12g", step, sol.Objective, ref.Objective)
				}
				top, cost := math.Inf(-1), 0.0
				for _, r := range p.rows {
					v := -r.b
					for e, j := range r.idx {
						v += r.val[e] * sol.X[j]
					}
					top = math.Max(top, v)
				}
				for j, x := range c {
					cost += x * sol.X[j]
				}
				if math.Abs(sol.X[0]-top) > 1e-9 || math.Abs(sol.Objective-top-cost) > 1e-9 {
					t.Errorf("step %d: t = %.12g, largest row %.12g, optimum %.12g = t + %.12g?", step, sol.X[0], top, sol.Objective, cost)
				}
			}
		})
	}
	m, err := dw.New(randomProgram(rand.New(rand.NewPCG(1, 1)), 3, 2, func(int) int { return 3 }).problem(0, 4, nil, nil))
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()
	for _, c := range [][]float64{{0, -1}, {1, 0}, {0, math.NaN()}, make([]float64, 100)} {
		if err := m.SetCosts(c); err == nil {
			t.Errorf("SetCosts(%v): no error", c)
		}
	}
}

// TestInterrupted: a solve that its context ends returns the error with
// the best prior so far: after a complete solve and new linking rows, a
// solve under a cancelled context returns that solve's prior on the old
// rows, zero on the new ones, and its lower bound, with no columns.
func TestInterrupted(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 8))
	const nb, nl = 12, 10
	p := randomProgram(rng, nb, nl, func(int) int { return nb })
	m, err := dw.New(p.problem(0, p.ncols, p.rows[:nl/2], seq(nb)))
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()
	first, err := m.Solve(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	if err := m.AddRows(p.problem(0, p.ncols, p.rows[nl/2:], nil)); err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	sol, err := m.Solve(ctx)
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("error %v, want context.Canceled", err)
	}
	if sol == nil || sol.X != nil {
		t.Fatalf("solution %+v, want a prior and no columns", sol)
	}
	// Rows: the first nl/2 linking rows, the nb block rows, then the new
	// linking rows.
	if len(sol.RowDual) != nl+nb {
		t.Fatalf("%d row duals, want %d", len(sol.RowDual), nl+nb)
	}
	var mass float64
	for r, d := range sol.RowDual {
		want := 0.0
		if r < nl/2 {
			want = first.RowDual[r]
		}
		if d != want {
			t.Errorf("row %d: dual %g, want %g", r, d, want)
		}
		mass -= d
	}
	if math.Abs(mass-1) > 1e-9 {
		t.Errorf("the prior's mass is %g, want 1", mass)
	}
	if math.Abs(sol.Objective-first.Objective) > 1e-9*math.Max(1, math.Abs(first.Objective)) {
		t.Errorf("lower bound %.12g, want about the first solve's optimum %.12g", sol.Objective, first.Objective)
	}
}

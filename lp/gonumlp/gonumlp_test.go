package gonumlp_test

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/pickwise/pickwise/lp"
	"github.com/pickwise/pickwise/lp/clp"
	"github.com/pickwise/pickwise/lp/gonumlp"
	"github.com/pickwise/pickwise/lp/internal/lptest"
)

var inf = math.Inf(1)

// extraCases are hand-solved problems aimed at the standard-form
// conversion: dependent equalities, constant rows, unconstrained columns.
func extraCases() []lptest.Case {
	var cases []lptest.Case
	// min x + 2y, x + y = 2 twice (a dependent pair), x, y >= 0.
	// By hand: x = 2, y = 0, objective 2. The duals of the two copies
	// are not unique, only their sum (1) is, so RowDual is not given.
	{
		p := &lp.Problem{}
		x := p.AddCol(1, 0, inf)
		y := p.AddCol(2, 0, inf)
		p.AddRow([]int{x, y}, []float64{1, 1}, 2, 2)
		p.AddRow([]int{x, y}, []float64{2, 2}, 4, 4)
		cases = append(cases, lptest.Case{Name: "dependent equalities", Problem: p, Status: lp.Optimal,
			Objective: 2, X: []float64{2, 0}})
	}
	// x + y = 2 and 2x + 2y = 5: inconsistent equalities (by hand).
	{
		p := &lp.Problem{}
		x := p.AddCol(1, -inf, inf)
		y := p.AddCol(1, -inf, inf)
		p.AddRow([]int{x, y}, []float64{1, 1}, 2, 2)
		p.AddRow([]int{x, y}, []float64{2, 2}, 5, 5)
		cases = append(cases, lptest.Case{Name: "inconsistent equalities", Problem: p, Status: lp.Infeasible})
	}
	// A row whose only column is fixed: 1 <= 3x <= 2 with x = 1 is
	// violated (by hand: 3 > 2).
	{
		p := &lp.Problem{}
		x := p.AddCol(1, 1, 1)
		p.AddRow([]int{x}, []float64{3}, 1, 2)
		cases = append(cases, lptest.Case{Name: "violated constant row", Problem: p, Status: lp.Infeasible})
	}
	// min -x + y with x in no row (x <= 3) and y >= 1 through a row:
	// by hand x = 3, y = 1, objective -2, the row's dual 1.
	{
		p := &lp.Problem{}
		x := p.AddCol(-1, -inf, 3)
		y := p.AddCol(1, -inf, inf)
		p.AddRow([]int{y}, []float64{1}, 1, inf)
		cases = append(cases, lptest.Case{Name: "column in no row", Problem: p, Status: lp.Optimal,
			Objective: -2, X: []float64{3, 1}, RowDual: []float64{1}})
		_ = x
	}
	// min -x with x in no row and no upper bound, plus an infeasible
	// row: infeasible, not unbounded (by hand).
	{
		p := &lp.Problem{}
		p.AddCol(-1, 0, inf)
		y := p.AddCol(0, 0, 1)
		p.AddRow([]int{y}, []float64{1}, 2, inf)
		cases = append(cases, lptest.Case{Name: "infeasible with a free ray", Problem: p, Status: lp.Infeasible})
	}
	// A random LP (invented data) on which gonum's simplex cycled forever
	// in phase I before b was perturbed. Infeasible according to CLP and
	// GLPK's glpsol; no hand derivation.
	{
		p := &lp.Problem{}
		cols := [][3]float64{{-4, -inf, 1}, {-4, 1, 3}, {-1, 1, 2}, {0, -1, 0}, {-1, 0, inf},
			{-3, -inf, 0}, {2, -inf, -1}, {-3, -inf, 1}, {5, 2, 4}}
		for _, c := range cols {
			p.AddCol(c[0], c[1], c[2])
		}
		rows := []struct {
			idx    []int
			val    []float64
			lo, up float64
		}{
			{[]int{6, 8, 1, 2, 5, 7, 0, 3, 4}, []float64{-1, 2, -2, -3, 1, 2, 3, -3, -2}, -inf, 2},
			{[]int{1, 6, 7, 4}, []float64{3, 0, -2, 2}, -3, -1},
			{[]int{5, 4, 6, 8, 1, 0, 7, 3}, []float64{-3, 1, 3, 4, 1, -1, 1, 1}, -2, inf},
			{[]int{1, 8, 0, 4}, []float64{1, -3, -1, 0}, 1, 3},
			{[]int{1, 4, 2, 6, 0, 3, 5, 7}, []float64{3, -4, 0, 4, 2, -4, -4, 3}, -inf, -2},
			{[]int{2, 3}, []float64{-4, -3}, -inf, 0},
			{[]int{1, 4, 8, 2, 0, 7, 6, 5, 3}, []float64{3, 4, -3, 1, 0, 0, -3, -4, 1}, 4, inf},
			{[]int{5}, []float64{-3}, -inf, -4},
			{[]int{0, 5}, []float64{-3, -4}, -3, inf},
			{[]int{4, 6, 2, 5, 8, 0, 3, 7, 1}, []float64{-1, 3, -3, -3, 2, 0, -1, -2, -4}, -2, -2},
			{[]int{1, 7, 0}, []float64{-4, -1, -4}, -inf, 1},
			{[]int{8, 4, 0, 3, 1, 5}, []float64{-3, 4, 4, 0, -1, 4}, 1, inf},
			{[]int{8, 1}, []float64{1, 2}, 0, 4},
			{[]int{1}, []float64{1}, -inf, 4},
		}
		for _, r := range rows {
			p.AddRow(r.idx, r.val, r.lo, r.up)
		}
		cases = append(cases, lptest.Case{Name: "cycling in phase I", Problem: p, Status: lp.Infeasible})
	}
	return cases
}

func TestHand(t *testing.T) {
	for _, c := range append(lptest.Hand(), extraCases()...) {
		t.Run(c.Name, func(t *testing.T) {
			sol, err := gonumlp.Solver{}.Solve(context.Background(), c.Problem)
			if c.Status != lp.Optimal {
				var se *lp.StatusError
				if !errors.As(err, &se) || se.Status != c.Status || !errors.Is(err, lp.ErrNotOptimal) {
					t.Fatalf("got %v, %v; want status %v", sol, err, c.Status)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(sol.Objective-c.Objective) > 1e-9 {
				t.Errorf("objective %g, want %g", sol.Objective, c.Objective)
			}
			for j, want := range c.X {
				if math.Abs(sol.X[j]-want) > 1e-9 {
					t.Errorf("x[%d] = %g, want %g", j, sol.X[j], want)
				}
			}
			for i, want := range c.RowDual {
				if math.Abs(sol.RowDual[i]-want) > 1e-9 {
					t.Errorf("row dual %d = %g, want %g", i, sol.RowDual[i], want)
				}
			}
			if err := lptest.CheckOptimal(c.Problem, sol.X, sol.RowDual, sol.Objective, 1e-9); err != nil {
				t.Error(err)
			}
		})
	}
}

// TestAgainstCLP compares gonum's optimum with CLP's (an independent
// simplex implementation) on seeded random feasible bounded LPs, and checks
// gonum's duals by strong duality.
func TestAgainstCLP(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	for k := range 40 {
		p, _ := lptest.Boxed(rng, 3+rng.IntN(25), 3+rng.IntN(25), 0.35)
		want, err := clp.Solver{}.Solve(context.Background(), p)
		if err != nil {
			t.Fatalf("problem %d: clp: %v", k, err)
		}
		got, err := gonumlp.Solver{}.Solve(context.Background(), p)
		if err != nil {
			t.Fatalf("problem %d (%d rows, %d columns): gonum: %v", k, p.NumRows(), p.NumCols(), err)
		}
		if math.Abs(got.Objective-want.Objective) > 1e-7*(1+math.Abs(want.Objective)) {
			t.Errorf("problem %d: gonum objective %.12g, clp %.12g", k, got.Objective, want.Objective)
		}
		if err := lptest.CheckOptimal(p, got.X, got.RowDual, got.Objective, 1e-8); err != nil {
			t.Errorf("problem %d: gonum: %v", k, err)
		}
	}
}

func TestContext(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	p := lptest.Hand()[0].Problem
	if _, err := (gonumlp.Solver{}).Solve(ctx, p); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled context: %v", err)
	}
}

// general returns a random LP with every kind of row and column bound and
// small integer data (invented for tests). Most are infeasible or
// unbounded, which is the point: the two backends must agree on the
// status too.
func general(rng *rand.Rand, m, n int) *lp.Problem {
	p := &lp.Problem{}
	for range n {
		lo, up := -inf, inf
		switch rng.IntN(5) {
		case 0:
		case 1:
			lo = float64(rng.IntN(5) - 2)
		case 2:
			up = float64(rng.IntN(5) - 2)
		default:
			lo = float64(rng.IntN(5) - 2)
			up = lo + float64(rng.IntN(4))
		}
		p.AddCol(float64(rng.IntN(11)-5), lo, up)
	}
	for range m {
		var idx []int
		var val []float64
		for _, j := range rng.Perm(n)[:1+rng.IntN(n)] {
			idx = append(idx, j)
			val = append(val, float64(rng.IntN(9)-4))
		}
		lo := float64(rng.IntN(9) - 4)
		switch rng.IntN(4) {
		case 0:
			p.AddRow(idx, val, lo, lo)
		case 1:
			p.AddRow(idx, val, lo, inf)
		case 2:
			p.AddRow(idx, val, -inf, lo)
		default:
			p.AddRow(idx, val, lo, lo+float64(rng.IntN(5)))
		}
	}
	return p
}

// loosened returns a random feasible boxed LP with some column bounds
// removed: still feasible, often unbounded.
func loosened(rng *rand.Rand) *lp.Problem {
	p, _ := lptest.Boxed(rng, 2+rng.IntN(30), 2+rng.IntN(30), 0.1+0.6*rng.Float64())
	for j := range p.NumCols() {
		switch rng.IntN(6) {
		case 0:
			p.ColLo[j], p.ColUp[j] = -inf, inf
		case 1:
			p.ColUp[j] = inf
		case 2:
			p.ColLo[j] = -inf
		}
	}
	return p
}

// TestStatusAgainstCLP compares the outcome of gonum and CLP on random LPs
// of every status. Each found faults in the other during development
// (gonum's phase I panicking, CLP calling unbounded problems infeasible).
func TestStatusAgainstCLP(t *testing.T) {
	rng := rand.New(rand.NewPCG(13, 14))
	status := func(err error) lp.Status {
		var se *lp.StatusError
		if errors.As(err, &se) {
			return se.Status
		}
		if err != nil {
			return lp.Unknown
		}
		return lp.Optimal
	}
	seen := map[lp.Status]int{}
	for k := range 400 {
		var p *lp.Problem
		if k%2 == 0 {
			p = general(rng, 1+rng.IntN(25), 1+rng.IntN(25))
		} else {
			p = loosened(rng)
		}
		want, werr := clp.Solver{}.Solve(context.Background(), p)
		got, gerr := gonumlp.Solver{}.Solve(context.Background(), p)
		ws, gs := status(werr), status(gerr)
		seen[ws]++
		if ws != gs {
			t.Errorf("problem %d: clp: %v; gonum: %v", k, werr, gerr)
			continue
		}
		if ws != lp.Optimal {
			continue
		}
		if math.Abs(got.Objective-want.Objective) > 1e-7*(1+math.Abs(want.Objective)) {
			t.Errorf("problem %d: gonum objective %.12g, clp %.12g", k, got.Objective, want.Objective)
		}
		for name, s := range map[string]*lp.Solution{"gonum": got, "clp": want} {
			if err := lptest.CheckOptimal(p, s.X, s.RowDual, s.Objective, 1e-8); err != nil {
				t.Errorf("problem %d: %s: %v", k, name, err)
			}
		}
	}
	// The generators must exercise every outcome.
	for _, s := range []lp.Status{lp.Optimal, lp.Infeasible, lp.Unbounded} {
		if seen[s] < 40 {
			t.Errorf("only %d problems ended %v", seen[s], s)
		}
	}
	t.Logf("outcomes: %v", seen)
}

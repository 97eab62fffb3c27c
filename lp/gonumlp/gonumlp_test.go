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

package clp_test

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
	"time"

	"github.com/pickwise/pickwise/lp"
	"github.com/pickwise/pickwise/lp/clp"
	"github.com/pickwise/pickwise/lp/internal/lptest"
)

func TestHand(t *testing.T) {
	for _, alg := range []clp.Algorithm{clp.Dual, clp.Primal, clp.Automatic, clp.DualPresolve} {
		for _, c := range lptest.Hand() {
			t.Run(alg.String()+"/"+c.Name, func(t *testing.T) {
				sol, err := clp.Solver{Algorithm: alg}.Solve(context.Background(), c.Problem)
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
}

// TestDualIsSensitivity checks the documented meaning of RowDual directly:
// raising the active bound of a row by e changes the optimal objective by
// RowDual*e (finite differences on nondegenerate hand problems).
func TestDualIsSensitivity(t *testing.T) {
	const e = 1e-4
	for _, c := range lptest.Hand() {
		if c.Status != lp.Optimal || c.X == nil {
			continue
		}
		t.Run(c.Name, func(t *testing.T) {
			base, err := clp.Solver{}.Solve(context.Background(), c.Problem)
			if err != nil {
				t.Fatal(err)
			}
			for i := range c.Problem.NumRows() {
				q := clone(c.Problem)
				switch {
				case base.RowDual[i] > 0:
					q.RowLo[i] += e
					if q.RowUp[i] < q.RowLo[i] {
						q.RowUp[i] = q.RowLo[i]
					}
				case base.RowDual[i] < 0:
					q.RowUp[i] += e
				default:
					continue
				}
				sol, err := clp.Solver{}.Solve(context.Background(), q)
				if err != nil {
					t.Fatal(err)
				}
				got := (sol.Objective - base.Objective) / e
				if math.Abs(got-base.RowDual[i]) > 1e-6 {
					t.Errorf("row %d: objective moves at rate %g, dual %g", i, got, base.RowDual[i])
				}
			}
		})
	}
}

// TestRandomDuality solves random feasible boxed LPs and checks primal
// feasibility and strong duality with the row duals (weak duality makes
// that a proof of optimality), with CLP's default tolerances and with
// tight ones.
func TestRandomDuality(t *testing.T) {
	cases := []struct {
		name   string
		solver clp.Solver
		check  float64
	}{
		{"default", clp.Solver{}, 1e-9},
		{"tolerances 1e-10", clp.Solver{PrimalTolerance: 1e-10, DualTolerance: 1e-10}, 1e-10},
		{"dual simplex", clp.Solver{Algorithm: clp.Dual}, 1e-8},
		{"tolerances 1e-7", clp.Solver{PrimalTolerance: 1e-7, DualTolerance: 1e-7}, 1e-8},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(1, 2))
			for k := range 40 {
				p, _ := lptest.Boxed(rng, 5+rng.IntN(40), 5+rng.IntN(40), 0.3)
				sol, err := c.solver.Solve(context.Background(), p)
				if err != nil {
					t.Fatalf("problem %d: %v", k, err)
				}
				if err := lptest.CheckOptimal(p, sol.X, sol.RowDual, sol.Objective, c.check); err != nil {
					t.Errorf("problem %d: %v", k, err)
				}
			}
		})
	}
}

// TestModelAddRows solves a problem, appends rows that cut off the
// optimum, re-solves from the basis, and compares with a solve of the
// enlarged problem from scratch.
func TestModelAddRows(t *testing.T) {
	for _, alg := range []clp.Algorithm{clp.Primal, clp.Dual} {
		t.Run(alg.String(), func(t *testing.T) { testModelAddRows(t, alg) })
	}
}

func testModelAddRows(t *testing.T, alg clp.Algorithm) {
	rng := rand.New(rand.NewPCG(3, 4))
	warm, cold := 0, 0
	for k := range 10 {
		p, x0 := lptest.Boxed(rng, 30, 40, 0.2)
		m, err := clp.NewModel(p)
		if err != nil {
			t.Fatal(err)
		}
		defer m.Close()
		m.Resolve = alg
		sol, err := m.Solve(context.Background())
		if err != nil {
			t.Fatalf("problem %d: %v", k, err)
		}
		full := clone(p)
		for round := range 3 {
			// Rows a·x <= (a·x0 + a·x*)/2 with a·x* > a·x0 cut off the
			// current optimum x* and keep the feasible point x0.
			var r clp.Rows
			for len(r.Lo) < 5 {
				idx, val := randomRow(rng, p.NumCols(), 8)
				a0, a1 := dot(idx, val, x0), dot(idx, val, sol.X)
				if a1-a0 < 1e-3 {
					continue
				}
				r.Add(idx, val, math.Inf(-1), (a0+a1)/2)
				full.AddRow(idx, val, math.Inf(-1), (a0+a1)/2)
			}
			if err := m.AddRows(&r); err != nil {
				t.Fatal(err)
			}
			var scratch *lp.Solution
			sol, scratch = resolveAndCompare(t, m, full, fmt.Sprintf("problem %d round %d", k, round))
			warm += sol.Iterations
			cold += scratch.Iterations
		}
	}
	// The point of the Model: re-solving from the previous basis takes
	// fewer simplex iterations than starting over.
	if warm >= cold {
		t.Errorf("warm re-solves took %d iterations in all, solves from scratch %d", warm, cold)
	}
	t.Logf("warm re-solves %d iterations, from scratch %d", warm, cold)
}

func TestModelErrors(t *testing.T) {
	p := &lp.Problem{}
	p.AddCol(1, 0, 1)
	p.AddCol(1, 0, 1)
	m, err := clp.NewModel(p)
	if err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		name string
		rows clp.Rows
	}{
		{"index out of range", clp.Rows{Start: []int{0, 1}, Index: []int32{2}, Value: []float64{1}, Lo: []float64{0}, Up: []float64{1}}},
		{"repeated column", clp.Rows{Start: []int{0, 2}, Index: []int32{1, 1}, Value: []float64{1, 1}, Lo: []float64{0}, Up: []float64{1}}},
		{"crossed bounds", clp.Rows{Start: []int{0, 1}, Index: []int32{0}, Value: []float64{1}, Lo: []float64{2}, Up: []float64{1}}},
		{"NaN coefficient", clp.Rows{Start: []int{0, 1}, Index: []int32{0}, Value: []float64{math.NaN()}, Lo: []float64{0}, Up: []float64{1}}},
		{"starts past the entries", clp.Rows{Start: []int{0, 3}, Index: []int32{0}, Value: []float64{1}, Lo: []float64{0}, Up: []float64{1}}},
		{"short starts", clp.Rows{Start: []int{0}, Index: []int32{0}, Value: []float64{1}, Lo: []float64{0}, Up: []float64{1}}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			if err := m.AddRows(&c.rows); err == nil {
				t.Errorf("AddRows accepted a bad batch")
			}
			if m.NumRows() != 0 {
				t.Errorf("model has %d rows after a rejected batch", m.NumRows())
			}
		})
	}
	m.Close()
	m.Close()
	if _, err := m.Solve(context.Background()); !errors.Is(err, clp.ErrClosed) {
		t.Errorf("Solve after Close: %v, want ErrClosed", err)
	}
	bad := clone(p)
	bad.AddRow([]int{0, 0}, []float64{1, 2}, 0, 1)
	if _, err := clp.NewModel(bad); err == nil {
		t.Error("NewModel accepted a repeated column in a row")
	}
}

func TestContext(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	p, _ := lptest.Boxed(rng, 10, 10, 0.5)
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := (clp.Solver{}).Solve(ctx, p); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled context: %v", err)
	}
	ctx, cancel = context.WithDeadline(context.Background(), time.Now().Add(-time.Second))
	defer cancel()
	if _, err := (clp.Solver{}).Solve(ctx, p); !errors.Is(err, context.DeadlineExceeded) {
		t.Errorf("expired context: %v", err)
	}
}

func clone(p *lp.Problem) *lp.Problem {
	return &lp.Problem{
		Obj:      append([]float64(nil), p.Obj...),
		ColLo:    append([]float64(nil), p.ColLo...),
		ColUp:    append([]float64(nil), p.ColUp...),
		RowStart: append([]int(nil), p.RowStart...),
		Index:    append([]int32(nil), p.Index...),
		Value:    append([]float64(nil), p.Value...),
		RowLo:    append([]float64(nil), p.RowLo...),
		RowUp:    append([]float64(nil), p.RowUp...),
	}
}

func randomRow(rng *rand.Rand, n, k int) ([]int, []float64) {
	idx := rng.Perm(n)[:k]
	val := make([]float64, k)
	for i := range val {
		val[i] = math.Round(rng.NormFloat64()*50) / 10
	}
	return idx, val
}

func dot(idx []int, val, x []float64) float64 {
	s := 0.0
	for k, j := range idx {
		s += val[k] * x[j]
	}
	return s
}

func TestTimeLimit(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 10))
	p := regretShaped(rng, 4000, 3, 3000, 30)
	start := time.Now()
	_, err := clp.Solver{MaxSeconds: 0.01}.Solve(context.Background(), p)
	var se *lp.StatusError
	if !errors.As(err, &se) || se.Status != lp.TimeLimit {
		t.Errorf("MaxSeconds 0.01: got %v, want status %v", err, lp.TimeLimit)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Millisecond)
	defer cancel()
	if _, err := (clp.Solver{}).Solve(ctx, p); !errors.Is(err, context.DeadlineExceeded) {
		t.Errorf("context deadline: got %v, want %v", err, context.DeadlineExceeded)
	}
	if d := time.Since(start); d > 5*time.Second {
		t.Errorf("two solves limited to 10ms took %v", d)
	}
}

// TestModelAddColumns grows a model by columns and then by rows that use
// them, as constraint generation does when new table cells appear, and
// compares every re-solve with a solve from scratch of the same problem.
func TestModelAddColumns(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	for k := range 8 {
		p, x0 := lptest.Boxed(rng, 20, 25, 0.3)
		m, err := clp.NewModel(p)
		if err != nil {
			t.Fatal(err)
		}
		defer m.Close()
		if _, err := m.Solve(context.Background()); err != nil {
			t.Fatalf("problem %d: %v", k, err)
		}
		full := clone(p)
		for round := range 3 {
			// Three new columns with costs of both signs, bounded, and a
			// row tying each to an old column.
			var lo, up, obj []float64
			for range 3 {
				c := rng.Float64()*2 - 1
				lo, up, obj = append(lo, 0), append(up, 1+rng.Float64()), append(obj, c)
				full.AddCol(c, 0, up[len(up)-1])
			}
			if err := m.AddColumns(lo, up, obj); err != nil {
				t.Fatal(err)
			}
			var r clp.Rows
			for j := range 3 {
				old := rng.IntN(p.NumCols())
				idx := []int{old, m.NumCols() - 3 + j}
				val := []float64{1, 1}
				// x0 with the new columns at 0 stays feasible.
				r.Add(idx, val, math.Inf(-1), x0[old]+0.5)
				full.AddRow(idx, val, math.Inf(-1), x0[old]+0.5)
			}
			if err := m.AddRows(&r); err != nil {
				t.Fatal(err)
			}
			resolveAndCompare(t, m, full, fmt.Sprintf("problem %d round %d", k, round))
		}
	}
	m, err := clp.NewModel(&lp.Problem{})
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()
	if err := m.AddColumns([]float64{1}, []float64{0}, []float64{0}); err == nil {
		t.Error("column with lower bound above upper bound accepted")
	}
}

// resolveAndCompare re-solves the grown model m and checks it against a
// solve from scratch of full, the same problem: same size, same objective
// to 1e-8, and a primal and dual solution that are optimal for full.
func resolveAndCompare(t *testing.T, m *clp.Model, full *lp.Problem, what string) (warm, scratch *lp.Solution) {
	t.Helper()
	if m.NumRows() != full.NumRows() || m.NumCols() != full.NumCols() {
		t.Fatalf("%s: model has %d rows and %d columns, want %d and %d", what, m.NumRows(), m.NumCols(), full.NumRows(), full.NumCols())
	}
	warm, err := m.Solve(context.Background())
	if err != nil {
		t.Fatalf("%s: %v", what, err)
	}
	scratch, err = clp.Solver{}.Solve(context.Background(), full)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(warm.Objective-scratch.Objective) > 1e-8*(1+math.Abs(scratch.Objective)) {
		t.Errorf("%s: warm objective %.12g, from scratch %.12g", what, warm.Objective, scratch.Objective)
	}
	if err := lptest.CheckOptimal(full, warm.X, warm.RowDual, warm.Objective, 1e-8); err != nil {
		t.Errorf("%s: %v", what, err)
	}
	return warm, scratch
}

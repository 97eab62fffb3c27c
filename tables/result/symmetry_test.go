package result_test

import (
	"context"
	"math"
	"slices"
	"testing"

	"github.com/pickwise/pickwise/tables"

	"github.com/pickwise/pickwise/tables/result"
)

// TestSymmetryUnchanged: channels with identical noise are interchangeable
// (permuting channels leaves every figure unchanged: an invariance of the
// problem, design notes "Invariances"), so the LP that keeps one row per
// orbit of configurations and shares columns across orbits of cells must
// reach the optimum of the LP without that reduction, with fewer rows, and
// its certificate must hold. Both methods, on models with a pair of
// identical channels, three identical channels, and two identical pairs.
func TestSymmetryUnchanged(t *testing.T) {
	a := []float64{-1, 0.2, 0.5, 0.3}
	b := []float64{0, 0.6, 0.4}
	c := []float64{-2, 0.1, 0.3, 0.2, 0.4}
	for _, tc := range []struct {
		name string
		pmfs [][]float64
	}{
		{"pair, two channels", [][]float64{a, a}},
		{"pair and another", [][]float64{a, b, a}},
		{"three identical", [][]float64{c, c, c}},
		{"two pairs", [][]float64{b, a, b, a}},
	} {
		for _, method := range []string{result.MethodDirect, result.MethodCG} {
			t.Run(tc.name+", "+method, func(t *testing.T) {
				m := model(t, 1, tc.pmfs...)
				sym, err := result.Solve(context.Background(), m, result.Options{Method: method})
				if err != nil {
					t.Fatal(err)
				}
				full, err := result.Solve(context.Background(), m, result.Options{Method: method, NoSymmetry: true})
				if err != nil {
					t.Fatal(err)
				}
				if math.Abs(sym.Objective-full.Objective) > 1e-9*full.Objective {
					t.Errorf("optimum %.15g with the symmetry, %.15g without", sym.Objective, full.Objective)
				}
				up, lo := result.Float(sym.Upper), result.Float(sym.Lower)
				// The direct LP is solved to CLP's tolerance; constraint
				// generation's working set to lp/dw's relative 1e-11.
				slack := 1e-12
				if method == result.MethodCG {
					slack = 1e-10
				}
				if lo > sym.Objective*(1+slack) || up < sym.Objective*(1-slack) {
					t.Errorf("bounds [%.15g, %.15g] do not hold the optimum %.15g", lo, up, sym.Objective)
				}
				if math.Abs(up-result.Float(full.Upper)) > 1e-9*full.Objective {
					t.Errorf("certified worst case %.15g with the symmetry, %.15g without", up, result.Float(full.Upper))
				}
				if method == result.MethodDirect && sym.Rows >= full.Rows {
					t.Errorf("%d rows with the symmetry, %d without", sym.Rows, full.Rows)
				}
				if sym.Greedy.Regret.Cmp(full.Greedy.Regret) != 0 {
					t.Errorf("greedy %v with the symmetry, %v without", sym.Greedy.Regret, full.Greedy.Regret)
				}
				if err := sym.Tables.Check(1e-12); err != nil {
					t.Error(err)
				}
				checkSymmetric(t, sym, tc.pmfs)
			})
		}
	}
}

// checkSymmetric asserts that swapping two channels with identical noise
// in any cell's readings swaps their probabilities: the shipped rule is
// left unchanged by the symmetry. The LP's probabilities are exactly
// symmetric; the shipped table rounds each cell to the common denominator
// on its own, which may put a rounding residue of about 2^-40 on one of two
// equal probabilities, hence the tolerance.
func checkSymmetric(t *testing.T, s *result.Solution, pmfs [][]float64) {
	t.Helper()
	n := len(pmfs)
	p1, p2 := make([]float64, n), make([]float64, n)
	for i := range n {
		for j := i + 1; j < n; j++ {
			if !slices.Equal(pmfs[i], pmfs[j]) {
				continue
			}
			for _, tb := range s.Tables.Tables {
				for _, c := range tb.Cells {
					r := make([]int, n)
					for k := range r {
						r[k] = tables.Far
					}
					for k, ch := range tb.Members {
						r[ch] = c.Diff[k]
					}
					s.Tables.Probs(r, p1)
					r[i], r[j] = r[j], r[i]
					s.Tables.Probs(r, p2)
					p2[i], p2[j] = p2[j], p2[i]
					if !slices.EqualFunc(p1, p2, func(a, b float64) bool { return math.Abs(a-b) <= 1e-9 }) {
						t.Fatalf("channels %d and %d: readings %v pick %v, swapped %v", i, j, r, p1, p2)
					}
				}
			}
		}
	}
}

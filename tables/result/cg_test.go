package result_test

import (
	"context"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"github.com/pickwise/pickwise/tables/exact"
	"github.com/pickwise/pickwise/tables/result"
)

// TestConstraintGeneration: constraint generation reaches the optimum of
// the direct LP (the reference: every configuration's row) on seeded
// random models with two and three channels and a four-channel model,
// whether the working set is solved by decomposition or by the simplex,
// and its result is certified.
func TestConstraintGeneration(t *testing.T) {
	rng := rand.New(rand.NewPCG(17, 5))
	for trial := 0; trial < 8; trial++ {
		n := 2 + trial%2
		m := randomModel(t, rng, n)
		if trial == 7 {
			// Four channels with two-point pmfs keep the direct LP small.
			n = 4
			m = model(t, 1, []float64{0, 0.3, 0.7}, []float64{-1, 0.6, 0.4}, []float64{0, 0.5, 0.5}, []float64{-1, 0.2, 0.8})
		}
		d, err := result.Solve(context.Background(), m, result.Options{Method: result.MethodDirect})
		if err != nil {
			t.Fatal(err)
		}
		// The working set solved by decomposition (the default) and
		// by CLP's simplex on the whole working-set LP.
		c, err := result.Solve(context.Background(), m, result.Options{Method: result.MethodCG})
		if err != nil {
			t.Fatal(err)
		}
		s, err := result.Solve(context.Background(), m, result.Options{Method: result.MethodCG, Master: result.MasterCLP})
		if err != nil {
			t.Fatal(err)
		}
		if !c.Converged || !s.Converged {
			t.Errorf("trial %d: constraint generation did not converge (decomposition %v, simplex %v)", trial, c.Converged, s.Converged)
		}
		if math.Abs(s.Objective-d.Objective) > 1e-9*d.Objective {
			t.Errorf("trial %d (n=%d): constraint generation by simplex %.15g, direct LP %.15g", trial, n, s.Objective, d.Objective)
		}
		if math.Abs(c.Objective-d.Objective) > 1e-9*d.Objective {
			t.Errorf("trial %d (n=%d): constraint generation %.15g, direct LP %.15g", trial, n, c.Objective, d.Objective)
		}
		if math.Abs(result.Float(c.Upper)-result.Float(d.Upper)) > 1e-9*d.Objective {
			t.Errorf("trial %d: certified worst cases %.15g (cg) and %.15g (direct)", trial, result.Float(c.Upper), result.Float(d.Upper))
		}
		// The certified worst case, from the configurations that
		// constraint generation found near it (minimax.CGResult.Near),
		// is that of every configuration, in exact arithmetic.
		for _, r := range []*result.Solution{c, s} {
			et, err := exact.NewTableDen(r.Tables, r.TableDen)
			if err != nil {
				t.Fatal(err)
			}
			w := exact.WorstCase(r.Layout, et, r.Layout.D)
			if w.Regret.Cmp(r.Upper) != 0 || !slices.Equal(w.Values, r.Optimal.Worst) {
				t.Errorf("trial %d: certified worst case %s at %v, every configuration's %s at %v", trial, r.Upper.RatString(), r.Optimal.Worst, w.Regret.RatString(), w.Values)
			}
		}
		if c.Lower.Cmp(c.Upper) > 0 || result.Float(c.Lower) > c.Objective*(1+1e-10) {
			t.Errorf("trial %d: cg bounds [%v, %v] around %v", trial, result.Float(c.Lower), result.Float(c.Upper), c.Objective)
		}
		if c.Rows >= d.Rows && n >= 3 {
			t.Logf("trial %d: cg used %d rows, direct %d", trial, c.Rows, d.Rows)
		}
	}
}

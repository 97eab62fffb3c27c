package minimax_test

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"testing"
	"time"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/lp"
	"github.com/pickwise/pickwise/lp/clp"
	"github.com/pickwise/pickwise/lp/dw"
	"github.com/pickwise/pickwise/lp/minimax"
	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/fast"
)

// stopAt is a CLP model whose solve number stop fails as a solve cut
// short by a deadline would; with partial, it fails as lp/dw's does, with
// the prior of that solve (here the complete solve's) and no columns.
type stopAt struct {
	m       *clp.Model
	solves  int
	stop    int
	partial bool
}

func (s *stopAt) AddColumns(lo, up, obj []float64) error { return s.m.AddColumns(lo, up, obj) }
func (s *stopAt) AddRows(p *lp.Problem) error {
	return s.m.AddRows(clp.RowsOf(p))
}
func (s *stopAt) Close() { s.m.Close() }
func (s *stopAt) Solve(ctx context.Context) (*lp.Solution, error) {
	s.solves++
	if s.solves == s.stop {
		err := fmt.Errorf("clp: solve interrupted: %w", context.DeadlineExceeded)
		if !s.partial {
			return nil, err
		}
		sol, serr := s.m.Solve(ctx)
		if serr != nil {
			return nil, serr
		}
		return &lp.Solution{Objective: sol.Objective, RowDual: sol.RowDual}, err
	}
	return s.m.Solve(ctx)
}

// TestCGDeadline: when the time limit interrupts an LP solve, constraint
// generation returns, unconverged, its best rule (no worse than any
// completed round's), and that rule is the one whose worst case it
// reports (cells that later rounds added pick as missing cells do); when
// it interrupts the first solve, there is no rule and the error says so;
// when the interrupted solve returns a prior, its bound is kept.
func TestCGDeadline(t *testing.T) {
	m := model(t, 1, []float64{-2, 0.1, 0.3, 0.2, 0.4}, []float64{0, 0.6, 0.25, 0.15}, []float64{-1, 0.5, 0.1, 0.4})
	l, err := tables.NewLayout(m)
	if err != nil {
		t.Fatal(err)
	}
	full, err := minimax.SolveCG(context.Background(), l, newStopAt(0), minimax.CGOptions{Batch: 4})
	if err != nil {
		t.Fatal(err)
	}
	if full.Rounds < 3 {
		t.Fatalf("the model needs %d rounds; the test needs at least 3", full.Rounds)
	}
	var reported []float64
	far := minimax.CGOptions{Batch: 4, Deadline: time.Now().Add(time.Hour),
		Progress: func(p minimax.Progress) { reported = append(reported, p.WorstCase) }}
	res, err := minimax.SolveCG(context.Background(), l, newStopAt(3), far)
	if err != nil {
		t.Fatal(err)
	}
	if res.Converged || res.Rounds != 2 || len(reported) != 2 {
		t.Fatalf("converged %v after %d rounds (%d reported), want false after 2", res.Converged, res.Rounds, len(reported))
	}
	if err := res.F.Tables.Check(1e-9); err != nil {
		t.Fatal(err)
	}
	w, err := fast.WorstCase(l, res.F.Tables, l.D)
	if err != nil {
		t.Fatal(err)
	}
	best := math.Min(reported[0], reported[1])
	if math.Abs(w.Regret-res.WorstCase) > 1e-12*res.WorstCase || res.WorstCase > best*(1+1e-12) {
		t.Errorf("returned rule has worst case %.15g, reported %.15g; rounds reported %v", w.Regret, res.WorstCase, reported)
	}
	if res.WorstCase < full.WorstCase*(1-1e-9) {
		t.Errorf("stopped early with worst case %.15g, below the converged %.15g", res.WorstCase, full.WorstCase)
	}
	if _, err := minimax.SolveCG(context.Background(), l, newStopAt(1), far); err == nil {
		t.Error("a deadline during the first solve gave no error")
	}

	// A solve cut short that returns its prior: the prior's bound, the
	// second solve's, is kept when it beats the completed round's.
	one, err := minimax.SolveCG(context.Background(), l, newStopAt(2), far)
	if err != nil {
		t.Fatal(err)
	}
	newPartial := func(p *lp.Problem) (minimax.Incremental, error) {
		in, err := newStopAt(2)(p)
		if err != nil {
			return nil, err
		}
		in.(*stopAt).partial = true
		return in, nil
	}
	kept, err := minimax.SolveCG(context.Background(), l, newPartial, far)
	if err != nil {
		t.Fatal(err)
	}
	boundOf := func(r *minimax.CGResult) float64 { return r.F.PriorValue(r.F.Prior(r.Solution.RowDual)) }
	plain, cut := boundOf(one), boundOf(kept)
	if kept.Solution.X != nil || kept.Solution.Objective != cut || !(cut > plain) || cut > full.WorstCase*(1+1e-9) {
		t.Errorf("with the cut-short solve's prior: solution with columns %v, objective %.15g, bound %.15g; without it %.15g; optimum %.15g",
			kept.Solution.X != nil, kept.Solution.Objective, cut, plain, full.WorstCase)
	}
	if kept.WorstCase != one.WorstCase {
		t.Errorf("the prior changed the rule: worst case %.15g, without it %.15g", kept.WorstCase, one.WorstCase)
	}
}

func newStopAt(stop int) func(*lp.Problem) (minimax.Incremental, error) {
	return func(p *lp.Problem) (minimax.Incremental, error) {
		m, err := clp.NewModel(p)
		if err != nil {
			return nil, err
		}
		m.PrimalTolerance, m.DualTolerance = 1e-9, 1e-9
		return &stopAt{m: m, stop: stop}, nil
	}
}

// TestCGKeepsBestRule: constraint generation stopped after k rounds
// returns the best rule it found: a mixture of the rules of the rounds and
// of the highest reading, never worse than any of them, no worse than after
// fewer rounds, and its reported worst case is the fast evaluator's figure
// for the returned tables (regrets are linear in the probabilities, so the
// mixture's figure follows from the two rules' regrets).
func TestCGKeepsBestRule(t *testing.T) {
	// Skewed 5-point pmfs on three channels: the rules of the rounds do
	// not improve monotonically (the working set leaves them free away
	// from its configurations).
	m := skewedModel(t)
	l, err := tables.NewLayout(m)
	if err != nil {
		t.Fatal(err)
	}
	const rounds = 10
	var all []float64
	opt := minimax.CGOptions{Batch: 2, MaxRounds: rounds, Progress: func(p minimax.Progress) { all = append(all, p.WorstCase) }}
	if _, err := minimax.SolveCG(context.Background(), l, newStopAt(0), opt); err != nil {
		t.Fatal(err)
	}
	if len(all) != rounds {
		t.Fatalf("%d rounds, want %d", len(all), rounds)
	}
	greedy, err := fast.WorstCase(l, tables.Greedy{}, l.D)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("worst cases by round: %v; highest reading %v", all, greedy.Regret)
	prev := math.Inf(1)
	mixed := false
	for k := 1; k <= rounds; k++ {
		best := all[0]
		for _, w := range all[:k] {
			best = math.Min(best, w)
		}
		opt := minimax.CGOptions{Batch: 2, MaxRounds: k}
		res, err := minimax.SolveCG(context.Background(), l, newStopAt(0), opt)
		if err != nil {
			t.Fatal(err)
		}
		if err := res.F.Tables.Check(1e-9); err != nil {
			t.Fatal(err)
		}
		w, err := fast.WorstCase(l, res.F.Tables, l.D)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(w.Regret-res.WorstCase) > 1e-12*w.Regret {
			t.Errorf("after %d rounds: reported %.15g, the tables have %.15g", k, res.WorstCase, w.Regret)
		}
		if w.Regret > best*(1+1e-12) || w.Regret > prev*(1+1e-12) {
			t.Errorf("after %d rounds: worst case %.15g, above the best round's %.15g or the %.15g after %d rounds", k, w.Regret, best, prev, k-1)
		}
		mixed = mixed || w.Regret < best*(1-1e-6)
		prev = w.Regret
	}
	if !mixed {
		t.Error("no mixture was better than the best round's rule: the model does not test mixing")
	}
}

// TestCGOffsets: with the offset rule's offsets for cells without
// columns, constraint generation starts from the offset rule's tables,
// which on skewed noise are far better than the highest reading, stopped
// after one round ships a rule no worse than them, and converges to the
// optimum of the direct LP (the LP is exact whatever rule the missing
// cells follow: invariance of the optimum, design notes, step 5).
func TestCGOffsets(t *testing.T) {
	m := skewedModel(t)
	direct := solve(t, m, clp.Solver{PrimalTolerance: 1e-9, DualTolerance: 1e-9})
	l := direct.l
	half := l.OffsetHalfSteps()
	empty := tables.NewOptimal(l)
	plain, err := fast.WorstCase(l, empty, l.D)
	if err != nil {
		t.Fatal(err)
	}
	empty.Half = half
	start, err := fast.WorstCase(l, empty, l.D)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("offsets %v half steps; tables without cells: %.6g by the highest reading, %.6g by the offsets", half, plain.Regret, start.Regret)
	if start.Regret > 0.8*plain.Regret {
		t.Fatalf("the offsets do not improve on the highest reading (%.6g against %.6g): the model does not test them", start.Regret, plain.Regret)
	}

	one, err := minimax.SolveCG(context.Background(), l, newStopAt(0), minimax.CGOptions{Batch: 2, MaxRounds: 1, Half: half})
	if err != nil {
		t.Fatal(err)
	}
	w, err := fast.WorstCase(l, one.F.Tables, l.D)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(one.F.Tables.Half, half) || math.Abs(w.Regret-one.WorstCase) > 1e-12*w.Regret || w.Regret > start.Regret*(1+1e-12) {
		t.Errorf("after one round: offsets %v, worst case %.15g (reported %.15g), the offsets alone %.15g",
			one.F.Tables.Half, w.Regret, one.WorstCase, start.Regret)
	}

	res, err := minimax.SolveCG(context.Background(), l, newStopAt(0), minimax.CGOptions{Batch: 4, Half: half})
	if err != nil {
		t.Fatal(err)
	}
	if !res.Converged {
		t.Fatal("constraint generation did not converge")
	}
	w, err = fast.WorstCase(l, res.F.Tables, l.D)
	if err != nil {
		t.Fatal(err)
	}
	opt := direct.sol.Objective
	if math.Abs(res.Solution.Objective-opt) > 1e-8*opt || math.Abs(w.Regret-opt) > 1e-8*opt {
		t.Errorf("LP value %.12g and worst case %.12g, want the direct optimum %.12g", res.Solution.Objective, w.Regret, opt)
	}
}

// TestCGOffsetsErrors: offsets of the wrong length, or unequal on channels
// that the symmetry makes interchangeable, are refused.
func TestCGOffsetsErrors(t *testing.T) {
	pmf := []float64{-1, 0.3, 0.4, 0.3}
	l, err := tables.NewLayout(model(t, 1, pmf, pmf, []float64{0, 0.5, 0.5}))
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name  string
		half  []int
		noSym bool
		ok    bool
	}{
		{"too few", []int{0, 0}, false, false},
		{"unequal on identical channels", []int{1, 0, 0}, false, false},
		{"unequal without the symmetry", []int{1, 0, 0}, true, true},
		{"equal on identical channels", []int{2, 2, -1}, false, true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := minimax.SolveCG(context.Background(), l, newStopAt(0), minimax.CGOptions{Half: tc.half, NoSymmetry: tc.noSym, MaxRounds: 1})
			if (err == nil) != tc.ok {
				t.Errorf("error %v, want ok %v", err, tc.ok)
			}
		})
	}
}

// understated is a CLP model that reports an LP value 1% below the one it
// found, as an LP solved beyond its tolerances would: its rule then breaks
// the working set's rows by more than the tolerance.
type understated struct{ stopAt }

func (u *understated) Solve(ctx context.Context) (*lp.Solution, error) {
	sol, err := u.stopAt.Solve(ctx)
	if err == nil {
		sol.Objective *= 0.99
	}
	return sol, err
}

// TestCGNoFalseConvergence: when the LP value understates what the rule
// reaches on the working set, constraint generation reports convergence
// only when it is real (the lower bound it stops on is the Bayes risk of
// the LP's prior, computed from the duals, not the reported value): the
// rule it then ships has the optimum of the direct LP as its worst case.
// What it ships is never better than that optimum (its worst case is the
// fast evaluator's).
func TestCGNoFalseConvergence(t *testing.T) {
	m := model(t, 1, []float64{-2, 0.1, 0.3, 0.2, 0.4}, []float64{0, 0.6, 0.25, 0.15}, []float64{-1, 0.5, 0.1, 0.4})
	direct := solve(t, m, clp.Solver{PrimalTolerance: 1e-9, DualTolerance: 1e-9})
	l := direct.l
	newModel := func(p *lp.Problem) (minimax.Incremental, error) {
		cm, err := clp.NewModel(p)
		if err != nil {
			return nil, err
		}
		cm.PrimalTolerance, cm.DualTolerance = 1e-9, 1e-9
		return &understated{stopAt{m: cm}}, nil
	}
	res, err := minimax.SolveCG(context.Background(), l, newModel, minimax.CGOptions{Batch: 4, MaxRounds: 50})
	if err != nil {
		t.Fatal(err)
	}
	w, err := fast.WorstCase(l, res.F.Tables, l.D)
	if err != nil {
		t.Fatal(err)
	}
	opt := direct.sol.Objective
	if (res.Converged && w.Regret > opt*(1+1e-9)) || math.Abs(w.Regret-res.WorstCase) > 1e-12*w.Regret || w.Regret < opt*(1-1e-9) {
		t.Errorf("converged %v after %d rounds; worst case %.12g (reported %.12g), optimum %.12g",
			res.Converged, res.Rounds, w.Regret, res.WorstCase, opt)
	}
}

// TestCGShaped: with lp/dw (a minimax.Shaper) the rounds after the first
// are shaped until one finds no violated configuration (and every round
// when exact rounds are split: solved exactly for the bound, then shaped),
// and the loop
// still converges to the optimum of the direct LP solved by CLP: the
// value of the solution it returns (the certificate's prior) and the best
// rule's worst case are that optimum.
func TestCGShaped(t *testing.T) {
	for _, tc := range []struct {
		name  string
		batch int
		split bool // exact rounds solved exactly, then shaped
	}{
		{"batch 1", 1, false},
		{"batch 2", 2, false},
		{"batch 2, exact rounds split", 2, true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			// (On skewedModel the first, exact round is already
			// optimal: no round would be shaped.)
			m := model(t, 1, []float64{-2, 0.1, 0.3, 0.2, 0.4}, []float64{0, 0.6, 0.25, 0.15}, []float64{-1, 0.5, 0.1, 0.4})
			direct := solve(t, m, clp.Solver{PrimalTolerance: 1e-9, DualTolerance: 1e-9})
			l := direct.l
			var shaped []bool
			opt := minimax.CGOptions{Batch: tc.batch, Half: l.OffsetHalfSteps(), Radius: -1, Split: -1, Progress: func(p minimax.Progress) {
				shaped = append(shaped, p.Shaped)
			}}
			if tc.split {
				opt.Split = 1
			}
			res, err := minimax.SolveCG(context.Background(), l, newDW, opt)
			if err != nil {
				t.Fatal(err)
			}
			t.Logf("rounds shaped: %v", shaped)
			if !slices.Contains(shaped, true) {
				t.Fatal("no round was shaped: the model does not test shaping")
			}
			if shaped[0] != tc.split {
				t.Errorf("the first round shaped %v, want %v", shaped[0], tc.split)
			}
			if tc.split && slices.Contains(shaped, false) {
				t.Errorf("exact rounds are split, but rounds shaped %v", shaped)
			}
			if !res.Converged {
				t.Fatal("constraint generation did not converge")
			}
			w, err := fast.WorstCase(l, res.F.Tables, l.D)
			if err != nil {
				t.Fatal(err)
			}
			want := direct.sol.Objective
			if math.Abs(res.Solution.Objective-want) > 1e-8*want || math.Abs(w.Regret-want) > 1e-8*want {
				t.Errorf("LP value %.12g and worst case %.12g, want the direct optimum %.12g", res.Solution.Objective, w.Regret, want)
			}
		})
	}
}

// skewedModel has three channels of unequal, skewed 5-point noise (one
// step), whose offset rule is far better than the highest reading.
func skewedModel(t testing.TB) *discretize.Model {
	return model(t, 1,
		[]float64{-3, 0.11, 0.16, 0.2, 0.19, 0.34},
		[]float64{0, 0.28, 0.1, 0.08, 0.26, 0.28},
		[]float64{-3, 0.15, 0.16, 0.48, 0.08, 0.13})
}

// TestCGNear: the configurations that constraint generation keeps near
// the worst case of its rule (CGResult.Near) are, in the fast evaluator's
// order, every configuration whose regret, from a fresh evaluation of the
// returned tables, comes within a relative NearRel of the worst case, and
// that worst case is the largest regret; so too for a loop stopped after
// two rounds, whose rule is a mixture of the rounds' rules.
func TestCGNear(t *testing.T) {
	rng := rand.New(rand.NewPCG(23, 3))
	for _, tc := range []struct {
		name      string
		m         *discretize.Model
		maxRounds int
	}{
		{"three channels", model(t, 1, []float64{-2, 0.1, 0.3, 0.2, 0.4}, []float64{0, 0.6, 0.25, 0.15}, []float64{-1, 0.5, 0.1, 0.4}), 0},
		{"stopped after two rounds", model(t, 1, []float64{-2, 0.1, 0.3, 0.2, 0.4}, []float64{0, 0.6, 0.25, 0.15}, []float64{-1, 0.5, 0.1, 0.4}), 2},
		{"random four channels", randomModel(t, rng, 4, 3), 0},
	} {
		t.Run(tc.name, func(t *testing.T) {
			l, err := tables.NewLayout(tc.m)
			if err != nil {
				t.Fatal(err)
			}
			res, err := minimax.SolveCG(context.Background(), l, newDW, minimax.CGOptions{Batch: 4, MaxRounds: tc.maxRounds})
			if err != nil {
				t.Fatal(err)
			}
			if res.Near == nil {
				t.Fatal("no configurations near the worst case")
			}
			var want [][]int
			top := 0.0
			for _, q := range tables.Subsets(l.N()) {
				err := fast.Regrets(l, res.F.Tables, q, l.D, func(v []int, reg float64) {
					top = math.Max(top, reg)
					if reg >= (1-minimax.NearRel)*res.WorstCase {
						want = append(want, slices.Clone(v))
					}
				})
				if err != nil {
					t.Fatal(err)
				}
			}
			if math.Abs(top-res.WorstCase) > 1e-12*top {
				t.Errorf("worst case %.15g, the tables' largest regret %.15g", res.WorstCase, top)
			}
			sorted := slices.Clone(res.Near)
			fast.SortConfigs(l.N(), sorted)
			if !slices.EqualFunc(sorted, res.Near, slices.Equal) {
				t.Error("Near is not in the evaluator's order")
			}
			keys := make(map[string]bool)
			for _, v := range res.Near {
				keys[fmt.Sprint(v)] = true
			}
			for _, v := range want {
				if !keys[fmt.Sprint(v)] {
					t.Fatalf("configuration %v, regret within %g of the worst case, is not near (%d near, %d want)", v, minimax.NearRel, len(res.Near), len(want))
				}
			}
		})
	}
}

// newDW returns an lp/dw model of p, for SolveCG (no model, not a nil
// *dw.Model, on an error).
func newDW(p *lp.Problem) (minimax.Incremental, error) {
	m, err := dw.New(p)
	if err != nil {
		return nil, err
	}
	return m, nil
}

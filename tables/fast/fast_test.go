package fast_test

import (
	"context"
	"fmt"
	"math"
	"math/big"
	"math/rand/v2"
	"runtime"
	"slices"
	"sync"
	"testing"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/exact"
	"github.com/pickwise/pickwise/tables/fast"
	"github.com/pickwise/pickwise/tables/result"
	"gonum.org/v1/gonum/stat/distuv"
)

// randomModel returns n channels with seeded random pmfs of lo..hi support
// points (both ends positive, inner points possibly zero) and random
// offsets, so that the noise may be biased.
func randomModel(t testing.TB, rng *rand.Rand, n, lo, hi int) *discretize.Model {
	t.Helper()
	var pmfs [][]float64
	for i := 0; i < n; i++ {
		k := lo + rng.IntN(hi-lo+1)
		w := make([]float64, k+1)
		w[0] = float64(-rng.IntN(k))
		for j := 1; j <= k; j++ {
			if j == 1 || j == k || rng.IntN(4) != 0 {
				w[j] = 0.05 + rng.Float64()
			}
		}
		pmfs = append(pmfs, w)
	}
	return fast.PMFModel(t, pmfs...)
}

func layout(t testing.TB, m *discretize.Model) *tables.Layout {
	t.Helper()
	l, err := tables.NewLayout(m)
	if err != nil {
		t.Fatal(err)
	}
	return l
}

// randomTable returns a table rule with a cell, holding seeded random
// probabilities over its alive channels, for every reading reachable from
// a configuration with gaps of at most d.
func randomTable(l *tables.Layout, rng *rand.Rand, d int) *tables.Optimal {
	o := tables.NewOptimal(l)
	n := l.N()
	r := make([]int, n)
	for _, q := range tables.Subsets(n) {
		tables.Configurations(n, q, d, func(v []int) bool {
			l.Outcomes(q, func(a []int, _ float64) {
				for i := range r {
					r[i] = v[i] + a[i]
				}
				_, alive, tab, c := o.Locate(r)
				if tab == nil || c >= 0 {
					return
				}
				p := make([]float64, len(tab.Members))
				var s float64
				for i, ch := range tab.Members {
					if alive.Has(ch) {
						p[i] = rng.Float64()
						s += p[i]
					}
				}
				for i := range p {
					p[i] /= s
				}
				tab.Add(r, alive, p)
			})
			return true
		})
	}
	return o
}

// randomOffsets returns offsets in half steps in [-3, 3].
func randomOffsets(rng *rand.Rand, n int) []int {
	h := make([]int, n)
	for i := range h {
		h[i] = rng.IntN(7) - 3
	}
	return h
}

type ruleCase struct {
	name  string
	rule  tables.Rule
	widen int
}

// rulesFor returns greedy, a random offset rule and a random table for l.
func rulesFor(l *tables.Layout, rng *rand.Rand) []ruleCase {
	half := randomOffsets(rng, l.N())
	return []ruleCase{
		{"greedy", tables.Greedy{}, result.GreedyWidth(l)},
		{"offset", tables.Offset{Half: half}, tables.OffsetWidth(half)},
		{"table", randomTable(l, rng, l.D), 0},
	}
}

// close reports whether the fast regret f agrees with the direct one g to
// 1e-12 absolute (steps) or relative, whichever is looser.
func close(f, g float64) bool {
	return math.Abs(f-g) <= 1e-12*math.Max(1, math.Abs(g))
}

// direct returns the direct evaluator's regret at every configuration of
// q, in enumeration order, computed in parallel.
func direct(l *tables.Layout, rule tables.Rule, q tables.Set, d int) ([][]int, []float64) {
	var vs [][]int
	tables.Configurations(l.N(), q, d, func(v []int) bool {
		vs = append(vs, append([]int(nil), v...))
		return true
	})
	regs := make([]float64, len(vs))
	var wg sync.WaitGroup
	w := runtime.GOMAXPROCS(0)
	for g := 0; g < w; g++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := g; i < len(vs); i += w {
				regs[i] = l.Regret(rule, vs[i])
			}
		}()
	}
	wg.Wait()
	return vs, regs
}

func key(v []int) string { return fmt.Sprint(v) }

// compare checks that Regrets reports every configuration of every subset
// exactly once, with the direct evaluator's regret to 1e-12, and returns
// the largest absolute and relative differences.
func compare(t *testing.T, e fast.Evaluator, l *tables.Layout, rule tables.Rule, d int) (absErr, relErr float64) {
	t.Helper()
	for _, q := range tables.Subsets(l.N()) {
		got := map[string]float64{}
		dup := 0
		err := e.Regrets(l, rule, q, d, func(v []int, reg float64) {
			k := key(v)
			if _, ok := got[k]; ok {
				dup++
			}
			got[k] = reg
		})
		if err != nil {
			t.Fatal(err)
		}
		if dup > 0 {
			t.Errorf("subset %v: %d configurations reported twice", q.Members(), dup)
		}
		vs, regs := direct(l, rule, q, d)
		if len(got) != len(vs) {
			t.Errorf("subset %v: %d configurations reported, want %d", q.Members(), len(got), len(vs))
		}
		bad := 0
		for i, v := range vs {
			f, ok := got[key(v)]
			if !ok {
				t.Errorf("subset %v: configuration %v not reported", q.Members(), v)
				continue
			}
			g := regs[i]
			absErr = max(absErr, math.Abs(f-g))
			if g != 0 {
				relErr = max(relErr, math.Abs(f-g)/math.Abs(g))
			}
			if !close(f, g) {
				if bad++; bad <= 3 {
					t.Errorf("subset %v configuration %v: fast regret %.17g, direct %.17g", q.Members(), v, f, g)
				}
			}
		}
	}
	return absErr, relErr
}

// TestAgreesWithDirect compares every configuration's regret with
// tables.Layout.Regret, the direct sum over joint noise outcomes, on
// seeded random pmf models, for greedy, an offset rule and a random table.
func TestAgreesWithDirect(t *testing.T) {
	cases := []struct {
		name      string
		seed      uint64
		n, lo, hi int
	}{
		{"two channels", 1, 2, 2, 5},
		{"two channels again", 2, 2, 2, 5},
		{"three channels", 3, 3, 2, 4},
		{"three channels wide", 4, 3, 4, 5},
		{"four channels", 5, 4, 2, 3},
		{"four channels wide", 7, 4, 2, 5},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(c.seed, 99))
			l := layout(t, randomModel(t, rng, c.n, c.lo, c.hi))
			for _, rc := range rulesFor(l, rng) {
				a, r := compare(t, fast.Evaluator{}, l, rc.rule, l.D+rc.widen)
				t.Logf("%s: D=%d largest difference %.3g absolute, %.3g relative", rc.name, l.D, a, r)
			}
		})
	}
}

// TestSmallGapBounds compares with the direct evaluator for gap bounds
// below and above the layout's D, down to 0 (every value equal).
func TestSmallGapBounds(t *testing.T) {
	rng := rand.New(rand.NewPCG(41, 42))
	l := layout(t, randomModel(t, rng, 3, 2, 4))
	rule := randomTable(l, rng, l.D)
	for _, d := range []int{0, 1, 2, 5, l.D + 3} {
		t.Run(fmt.Sprint("d=", d), func(t *testing.T) {
			compare(t, fast.Evaluator{}, l, rule, d)
			compare(t, fast.Evaluator{}, l, tables.Greedy{}, d)
		})
	}
}

// dyadicTable is randomTable with probabilities that are multiples of 1/8,
// so that every regret is a short dyadic rational computed without
// round-off by both evaluators.
func dyadicTable(l *tables.Layout, rng *rand.Rand, d int) *tables.Optimal {
	o := randomTable(l, rng, d)
	for _, tab := range o.Tables {
		for _, c := range tab.Cells {
			var alive []int
			for i, ch := range tab.Members {
				c.P[i] = 0
				if c.Alive.Has(ch) {
					alive = append(alive, i)
				}
			}
			for range 8 {
				c.P[alive[rng.IntN(len(alive))]] += 0.125
			}
		}
	}
	return o
}

// TestWorstCaseTies compares WorstCase with tables.Layout.WorstCase on
// models whose noise probabilities and rule probabilities are dyadic with
// few digits: every regret is then exact in float64 in both evaluators, so
// the two must agree bit for bit, including which configuration wins among
// the many that tie at the worst case (the first in enumeration order).
func TestWorstCaseTies(t *testing.T) {
	two := fast.PMFModel(t, []float64{-1, 0.25, 0.5, 0.25}, []float64{-1, 0.25, 0.5, 0.25})
	three := fast.PMFModel(t, []float64{-1, 0.25, 0.5, 0.25}, []float64{0, 0.5, 0.5}, []float64{-1, 0.5, 0, 0.5})
	four := fast.PMFModel(t, []float64{0, 1}, []float64{-1, 0.5, 0.5}, []float64{-1, 0.5, 0.5}, []float64{0, 0.5, 0.5})
	cases := []struct {
		name  string
		m     *discretize.Model
		rule  func(l *tables.Layout) tables.Rule
		widen int
		ties  bool // whether several configurations reach the worst case
	}{
		{"two channels greedy", two, func(*tables.Layout) tables.Rule { return tables.Greedy{} }, 0, true},
		{"two channels table", two, func(l *tables.Layout) tables.Rule { return dyadicTable(l, rand.New(rand.NewPCG(1, 2)), l.D) }, 0, false},
		// Offsets of 0, 1, 2, ... half steps allow ties of two channels
		// only, so shares stay dyadic.
		{"three channels offset", three, func(*tables.Layout) tables.Rule { return tables.Offset{Half: []int{0, 1, 2}} }, 2, true},
		{"three channels table", three, func(l *tables.Layout) tables.Rule { return dyadicTable(l, rand.New(rand.NewPCG(3, 4)), l.D) }, 0, false},
		{"four channels offset", four, func(*tables.Layout) tables.Rule { return tables.Offset{Half: []int{0, 1, 2, 3}} }, 3, true},
		{"four channels table", four, func(l *tables.Layout) tables.Rule { return dyadicTable(l, rand.New(rand.NewPCG(5, 6)), l.D) }, 0, false},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			l := layout(t, c.m)
			rule := c.rule(l)
			d := l.D + c.widen
			got, err := fast.WorstCase(l, rule, d)
			if err != nil {
				t.Fatal(err)
			}
			want := l.WorstCase(rule, d)
			if got.Regret != want.Regret || key(got.Values) != key(want.Values) || got.Subset != want.Subset || got.Configurations != want.Configurations {
				t.Errorf("fast worst case %.17g at %v (subset %v, %d configurations); direct %.17g at %v (subset %v, %d configurations)",
					got.Regret, got.Values, got.Subset.Members(), got.Configurations, want.Regret, want.Values, want.Subset.Members(), want.Configurations)
			}
			// Tiles report in another order; the tie-break must not care.
			tiled, err := fast.Evaluator{MaxBytes: 1 << 14, Workers: 1}.WorstCase(l, rule, d)
			if err != nil {
				t.Fatal(err)
			}
			if tiled.Regret != want.Regret || key(tiled.Values) != key(want.Values) {
				t.Errorf("in small tiles: worst case %.17g at %v; direct %.17g at %v", tiled.Regret, tiled.Values, want.Regret, want.Values)
			}
			ties := 0
			for _, q := range tables.Subsets(l.N()) {
				vs, regs := direct(l, rule, q, d)
				m := map[string]float64{}
				if err := fast.Regrets(l, rule, q, d, func(v []int, reg float64) { m[key(v)] = reg }); err != nil {
					t.Fatal(err)
				}
				for i, v := range vs {
					if m[key(v)] != regs[i] {
						t.Errorf("configuration %v: fast %.17g, direct %.17g, want equal", v, m[key(v)], regs[i])
					}
					if regs[i] == want.Regret {
						ties++
					}
				}
			}
			t.Logf("worst case %g at %v, reached by %d configurations", want.Regret, want.Values, ties)
			if c.ties && ties < 2 {
				t.Errorf("only %d configuration reaches the worst case: the case does not test tie-breaking", ties)
			}
		})
	}
}

// collect returns Regrets' reports for every subset, in report order.
func collect(t *testing.T, e fast.Evaluator, l *tables.Layout, rule tables.Rule, d int) ([]string, []float64) {
	t.Helper()
	var keys []string
	var regs []float64
	for _, q := range tables.Subsets(l.N()) {
		err := e.Regrets(l, rule, q, d, func(v []int, reg float64) {
			keys = append(keys, key(v))
			regs = append(regs, reg)
		})
		if err != nil {
			t.Fatal(err)
		}
	}
	return keys, regs
}

// TestTilesAndWorkers checks that a tight memory budget (many tiles) and a
// single goroutine give the same regrets, bit for bit, as one tile on
// every core: each sum has a fixed order whatever the split of the work.
// (TestTiles checks that the budget does split the box.)
func TestTilesAndWorkers(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	l := layout(t, randomModel(t, rng, 3, 3, 5))
	rule := randomTable(l, rng, l.D)
	k0, r0 := collect(t, fast.Evaluator{}, l, rule, l.D)
	for _, e := range []fast.Evaluator{{Workers: 1}, {MaxBytes: 1 << 16}, {MaxBytes: 1 << 16, Workers: 1}} {
		k1, r1 := collect(t, e, l, rule, l.D)
		got := map[string]float64{}
		for i := range k1 {
			got[k1[i]] = r1[i]
		}
		if len(k1) != len(k0) || len(got) != len(k0) {
			t.Fatalf("%+v: %d reports (%d distinct), want %d", e, len(k1), len(got), len(k0))
		}
		for i, k := range k0 {
			if got[k] != r0[i] {
				t.Fatalf("%+v: configuration %s regret %.17g, want %.17g", e, k, got[k], r0[i])
			}
		}
	}
}

// normalModel discretizes normal channels with the given sigmas at step h
// with tail mass tail.
func normalModel(t testing.TB, h, tail float64, sigma ...float64) *discretize.Model {
	t.Helper()
	m := &discretize.Model{Step: h, Tail: tail}
	for i, s := range sigma {
		p, cut, err := discretize.Normal{Sigma: s}.Lattice(h, tail)
		if err != nil {
			t.Fatal(err)
		}
		m.Channels = append(m.Channels, discretize.Channel{Name: string(rune('A' + i)), Kind: "normal", PMF: p, Cut: cut})
	}
	return m
}

func solve(t testing.TB, m *discretize.Model) *result.Solution {
	t.Helper()
	s, err := result.Solve(context.Background(), m, result.Options{})
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// TestNormalAndSolved compares every configuration's regret with the
// direct evaluator on a normal model and on the optimal tables that
// result.Solve ships for small models.
func TestNormalAndSolved(t *testing.T) {
	normal := normalModel(t, 1, 1e-4, 0.8, 1, 1.6)
	small := fast.PMFModel(t, []float64{-1, 1, 2, 1}, []float64{0, 1, 1}, []float64{-1, 1, 0, 3})
	solvedSmall := solve(t, small)
	solvedNormal := solve(t, normalModel(t, 0.5, 1e-2, 0.5, 0.5, 1))
	cases := []struct {
		name  string
		l     *tables.Layout
		rule  tables.Rule
		widen int
	}{
		{"normal greedy", layout(t, normal), tables.Greedy{}, 0},
		{"normal offset", layout(t, normal), tables.Offset{Half: []int{1, 0, -2}}, 2},
		{"solved pmf table", solvedSmall.Layout, solvedSmall.Tables, 0},
		{"solved normal table", solvedNormal.Layout, solvedNormal.Tables, 0},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			a, r := compare(t, fast.Evaluator{}, c.l, c.rule, c.l.D+c.widen)
			t.Logf("D=%d largest difference %.3g absolute, %.3g relative", c.l.D, a, r)
		})
	}
	// The worst case of the shipped tables is the certified upper bound.
	for _, s := range []*result.Solution{solvedSmall, solvedNormal} {
		w, err := fast.WorstCase(s.Layout, s.Tables, s.Layout.D)
		if err != nil {
			t.Fatal(err)
		}
		if up := result.Float(s.Upper); !close(w.Regret, up) {
			t.Errorf("worst case of the solved tables %.17g, certified upper bound %.17g", w.Regret, up)
		}
	}
}

// TestWorkedExample: channel A read exactly, channel B with noise -1 or +1
// reading units with probability 1/2 each, at step h = 1/k (a standard
// worked example of the field, derived by hand in the design notes): the
// optimum is 1/4 in reading units. Greedy's worst case is (1 - h)/2 (design
// notes), reached just under one unit apart; derived by hand here: B
// exactly one unit above A reads level with A half the time, and the shared
// tie costs 1/4, so the worst case is max((1 - h)/2, 1/4), which the notes'
// formula misses at h = 1. Evaluating greedy on a wider range of
// configurations than it needs must not change the figure.
func TestWorkedExample(t *testing.T) {
	for _, k := range []int{1, 2, 4, 5} {
		t.Run(fmt.Sprintf("step 1/%d", k), func(t *testing.T) {
			h := 1 / float64(k)
			w := make([]float64, 2*k+1)
			w[0], w[2*k] = 0.5, 0.5
			pa, _ := discretize.Quantize(0, []float64{1})
			pb, _ := discretize.Quantize(-k, w)
			m := &discretize.Model{Step: h, Channels: []discretize.Channel{{Name: "A", Kind: "exact", PMF: pa}, {Name: "B", Kind: "pmf", PMF: pb}}}
			l := layout(t, m)
			for _, d := range []int{l.D + result.GreedyWidth(l), 3*l.D + 7} {
				g, err := fast.WorstCase(l, tables.Greedy{}, d)
				if err != nil {
					t.Fatal(err)
				}
				if want := max((1-h)/2, 0.25); math.Abs(g.Regret*h-want) > 1e-12 {
					t.Errorf("d=%d: greedy's worst case %.17g at %v, want %.17g", d, g.Regret*h, g.Values, want)
				}
			}
			s := solve(t, m)
			o, err := fast.WorstCase(l, s.Tables, l.D)
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(o.Regret*h-0.25) > 1e-12 {
				t.Errorf("optimal table's worst case %.17g at %v, want 1/4", o.Regret*h, o.Values)
			}
		})
	}
}

// TestGaussianPair: two channels whose noise difference is N(0, 1). The
// minimax-regret treatment choice literature (Stoye 2009, J.
// Econometrics; from memory) gives greedy's worst case as
// max over d > 0 of d Phi(-d), about 0.16997; the design notes require the
// rounded model at step s/10 to come within 1% of it. The reference is
// computed here with gonum.
func TestGaussianPair(t *testing.T) {
	s := math.Sqrt(0.5)
	l := layout(t, normalModel(t, 0.1, 1e-6, s, s))
	g, err := fast.WorstCase(l, tables.Greedy{}, l.D+result.GreedyWidth(l))
	if err != nil {
		t.Fatal(err)
	}
	ref := 0.0
	for i := 1; i <= 300000; i++ {
		d := float64(i) * 1e-5
		ref = max(ref, d*distuv.UnitNormal.CDF(-d))
	}
	got := g.Regret * 0.1
	t.Logf("greedy's worst case %.6f at %v, continuous reference %.6f", got, g.Values, ref)
	if math.Abs(got-ref) > 0.01*ref {
		t.Errorf("greedy's worst case %.6f, reference %.6f: off by more than 1%%", got, ref)
	}
}

// TestCandidates checks Candidates against a filter of every reported
// regret, and its intended use: the exact worst case of a solved table
// (its certified upper bound, computed by package exact over every
// configuration) is the largest exact regret among the candidates alone.
func TestCandidates(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	l := layout(t, randomModel(t, rng, 3, 2, 4))
	rule := randomTable(l, rng, l.D)
	keys, regs := collect(t, fast.Evaluator{}, l, rule, l.D)
	top := math.Inf(-1)
	for _, r := range regs {
		top = max(top, r)
	}
	w, err := fast.WorstCase(l, rule, l.D)
	if err != nil {
		t.Fatal(err)
	}
	pos := map[string]int{} // position in enumeration order
	for _, q := range tables.Subsets(l.N()) {
		tables.Configurations(l.N(), q, l.D, func(v []int) bool {
			pos[key(v)] = len(pos)
			return true
		})
	}
	for _, tc := range []struct{ tol, rel float64 }{{0, 0}, {1e-9, 0}, {0.05, 0}, {0.3, 0}, {0, 0.1}, {1e-9, 1e-9}, {0.02, 0.2}} {
		tol, rel := tc.tol, tc.rel
		cands, err := fast.Candidates(l, rule, l.D, tol, rel)
		if err != nil {
			t.Fatal(err)
		}
		want := map[string]bool{}
		for i, k := range keys {
			if regs[i] >= top-tol-rel*top {
				want[k] = true
			}
		}
		if len(cands) != len(want) {
			t.Errorf("tol %g, rel %g: %d candidates, want %d", tol, rel, len(cands), len(want))
		}
		for i, v := range cands {
			if !want[key(v)] {
				t.Errorf("tol %g, rel %g: %v is not within the margin of the worst case", tol, rel, v)
			}
			if i > 0 && pos[key(cands[i-1])] >= pos[key(v)] {
				t.Errorf("tol %g, rel %g: candidates %v and %v out of enumeration order", tol, rel, cands[i-1], v)
			}
		}
		if len(cands) == 0 || key(cands[0]) != key(w.Values) {
			t.Errorf("tol %g, rel %g: first candidate is not the worst case %v", tol, rel, w.Values)
		}
	}

	s := solve(t, fast.PMFModel(t, []float64{-1, 1, 2, 1}, []float64{0, 1, 1}, []float64{-1, 1, 0, 3}))
	et, err := exact.NewTable(s.Tables, s.ProbBits)
	if err != nil {
		t.Fatal(err)
	}
	cands, err := fast.Candidates(s.Layout, s.Tables, s.Layout.D, 1e-9, 0)
	if err != nil {
		t.Fatal(err)
	}
	best := new(big.Rat)
	for _, v := range cands {
		if r := exact.Regret(s.Layout, et, v); r.Cmp(best) > 0 {
			best = r
		}
	}
	if best.Cmp(s.Upper) != 0 {
		t.Errorf("largest exact regret over %d candidates %s, certified worst case %s", len(cands), best.RatString(), s.Upper.RatString())
	}
}

// TestSortConfigs: SortConfigs puts configurations of every subset, in
// any order, into the order in which tables.Subsets and
// tables.Configurations enumerate them.
func TestSortConfigs(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 8))
	const n, d = 4, 3
	var want [][]int
	for _, q := range tables.Subsets(n) {
		tables.Configurations(n, q, d, func(v []int) bool {
			want = append(want, slices.Clone(v))
			return true
		})
	}
	got := slices.Clone(want)
	rng.Shuffle(len(got), func(i, j int) { got[i], got[j] = got[j], got[i] })
	fast.SortConfigs(n, got)
	for i := range want {
		if !slices.Equal(got[i], want[i]) {
			t.Fatalf("position %d of %d: %v, want %v", i, len(want), got[i], want[i])
		}
	}
}

// farRule gives probability to a channel that reads tables.Far.
type farRule struct{}

func (farRule) Probs(r []int, p []float64) {
	for i := range p {
		p[i] = 0
		if r[i] == tables.Far {
			p[i] = 1
			return
		}
	}
	p[0] = 1
}

// TestErrors checks that bad arguments and impossible budgets are
// reported as errors.
func TestErrors(t *testing.T) {
	l := layout(t, fast.PMFModel(t, []float64{-1, 1, 1, 1}, []float64{0, 1, 1}, []float64{-1, 1, 0, 3}))
	cases := []struct {
		name string
		run  func() error
	}{
		{"nil layout", func() error { _, err := fast.WorstCase(nil, tables.Greedy{}, 3); return err }},
		{"nil rule", func() error { _, err := fast.WorstCase(l, nil, 3); return err }},
		{"negative gap", func() error { _, err := fast.WorstCase(l, tables.Greedy{}, -1); return err }},
		{"huge gap", func() error { _, err := fast.WorstCase(l, tables.Greedy{}, 1<<40); return err }},
		{"one channel", func() error { return fast.Regrets(l, tables.Greedy{}, tables.SetOf(1), 3, func([]int, float64) {}) }},
		{"channel out of range", func() error { return fast.Regrets(l, tables.Greedy{}, tables.SetOf(0, 3), 3, func([]int, float64) {}) }},
		{"tiny budget", func() error { _, err := fast.Evaluator{MaxBytes: 100}.WorstCase(l, tables.Greedy{}, 3); return err }},
		{"negative tolerance", func() error { _, err := fast.Candidates(l, tables.Greedy{}, 3, -1, 0); return err }},
		{"NaN tolerance", func() error { _, err := fast.Candidates(l, tables.Greedy{}, 3, math.NaN(), 0); return err }},
		{"negative relative tolerance", func() error { _, err := fast.Candidates(l, tables.Greedy{}, 3, 0, -0.1); return err }},
		{"relative tolerance 1", func() error { _, err := fast.Candidates(l, tables.Greedy{}, 3, 0, 1); return err }},
		{"rule picks a far channel", func() error {
			return fast.Regrets(l, farRule{}, tables.SetOf(1, 2), 3, func([]int, float64) {})
		}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			err := c.run()
			if err == nil {
				t.Fatal("no error")
			}
			t.Log(err)
		})
	}
}

// TestLargeNormal spot-checks the regrets of a model far beyond the direct
// evaluator's reach for every configuration: three normal channels
// (sigma 0.8, 1.0 and 1.6 at step 0.1, tail 1e-6; pmfs of 79 to 157
// points). The worst configuration and a seeded sample of others are
// evaluated directly, and those with a positive regret exactly.
func TestLargeNormal(t *testing.T) {
	if testing.Short() {
		t.Skip("large model")
	}
	l := layout(t, normalModel(t, 0.1, 1e-6, 0.8, 1.0, 1.6))
	q := tables.SetOf(0, 1, 2)
	rng := rand.New(rand.NewPCG(31, 32))
	var sample [][]int
	var regs []float64
	var worst []int
	top := math.Inf(-1)
	n := 0
	err := fast.Regrets(l, tables.Greedy{}, q, l.D, func(v []int, reg float64) {
		n++
		if reg > top {
			top, worst = reg, append(worst[:0], v...)
		}
		if rng.IntN(100000) == 0 {
			sample = append(sample, append([]int(nil), v...))
			regs = append(regs, reg)
		}
	})
	if err != nil {
		t.Fatal(err)
	}
	sample = append(sample, worst)
	regs = append(regs, top)
	var absErr, relErr float64
	for i, v := range sample {
		g := l.Regret(tables.Greedy{}, v)
		absErr = max(absErr, math.Abs(regs[i]-g))
		if g > 0 {
			relErr = max(relErr, math.Abs(regs[i]-g)/g)
		}
		if !close(regs[i], g) {
			t.Errorf("configuration %v: fast regret %.17g, direct %.17g", v, regs[i], g)
		}
		if g == 0 {
			continue
		}
		// Exact rational arithmetic (package exact) as the reference:
		// the fast sums are short, so they should be far closer to it
		// than the 1e-12 asked of them.
		x, _ := exact.Regret(l, exact.Greedy(3), v).Float64()
		t.Logf("%v: fast %.17g, direct %.17g, exact %.17g: errors %.2g and %.2g", v, regs[i], g, x, regs[i]-x, g-x)
		if math.Abs(regs[i]-x) > 1e-14*max(1, x) {
			t.Errorf("configuration %v: fast regret %.17g, exact %.17g", v, regs[i], x)
		}
	}
	t.Logf("%d configurations; worst %.12g at %v; %d checked directly, largest difference %.3g absolute, %.3g relative", n, top, worst, len(sample), absErr, relErr)
}

// TestScan checks Scan against Regrets: the same regrets in the same
// order, and fn called exactly at the configurations pick chooses, with
// their values, in tiles and on one goroutine as well as on all.
func TestScan(t *testing.T) {
	rng := rand.New(rand.NewPCG(31, 7))
	l := layout(t, randomModel(t, rng, 4, 2, 4))
	rule := randomTable(l, rng, l.D)
	_, regs := collect(t, fast.Evaluator{}, l, rule, l.D)
	// A threshold with about one configuration in fifty above it, and
	// every seventh configuration whatever its regret.
	sorted := slices.Sorted(slices.Values(regs))
	threshold := sorted[len(sorted)*49/50]
	pick := func(at int, reg float64) bool { return reg > threshold || at%7 == 0 }
	for _, tc := range []struct {
		name string
		e    fast.Evaluator
	}{
		{"one tile, every core", fast.Evaluator{}},
		{"tiles, one goroutine", fast.Evaluator{MaxBytes: 1 << 16, Workers: 1}},
		{"tiles, every core", fast.Evaluator{MaxBytes: 1 << 16}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			// Tiles change the order: compare with Regrets in the
			// same tiles.
			wantKeys, wantRegs := collect(t, tc.e, l, rule, l.D)
			var got []float64
			var calls []int
			for _, q := range tables.Subsets(l.N()) {
				var err error
				got, err = tc.e.Scan(l, rule, q, l.D, got, pick, func(at int, v []int, reg float64) {
					if k := key(v); k != wantKeys[at] || reg != wantRegs[at] {
						t.Fatalf("call at %d: %s regret %.17g, want %s %.17g", at, k, reg, wantKeys[at], wantRegs[at])
					}
					if len(calls) > 0 && at <= calls[len(calls)-1] {
						t.Fatalf("call at %d after a call at %d", at, calls[len(calls)-1])
					}
					calls = append(calls, at)
				})
				if err != nil {
					t.Fatal(err)
				}
			}
			if !slices.Equal(got, wantRegs) {
				t.Fatalf("%d regrets, want %d, or they differ", len(got), len(wantRegs))
			}
			var want []int
			for at, reg := range wantRegs {
				if pick(at, reg) {
					want = append(want, at)
				}
			}
			if !slices.Equal(calls, want) {
				t.Fatalf("fn called at %d configurations, want %d", len(calls), len(want))
			}
			if len(want) == 0 || len(want) == len(wantRegs) {
				t.Fatalf("pick chose %d of %d configurations: the test checks nothing", len(want), len(wantRegs))
			}
		})
	}
}

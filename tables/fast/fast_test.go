package fast

import (
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"sync"
	"testing"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/result"
)

// pmfModel builds a model at step 1 from pmfs given as {lo, weights...}.
func pmfModel(t testing.TB, pmfs ...[]float64) *discretize.Model {
	t.Helper()
	m := &discretize.Model{Step: 1}
	for i, w := range pmfs {
		p, err := discretize.Quantize(int(w[0]), w[1:])
		if err != nil {
			t.Fatal(err)
		}
		m.Channels = append(m.Channels, discretize.Channel{Name: string(rune('A' + i)), Kind: "pmf", PMF: p})
	}
	return m
}

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
	return pmfModel(t, pmfs...)
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
func compare(t *testing.T, e Evaluator, l *tables.Layout, rule tables.Rule, d int) (absErr, relErr float64) {
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
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(c.seed, 99))
			l := layout(t, randomModel(t, rng, c.n, c.lo, c.hi))
			for _, rc := range rulesFor(l, rng) {
				a, r := compare(t, Evaluator{}, l, rc.rule, l.D+rc.widen)
				t.Logf("%s: D=%d largest difference %.3g absolute, %.3g relative", rc.name, l.D, a, r)
			}
		})
	}
}

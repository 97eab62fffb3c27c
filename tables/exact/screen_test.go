package exact_test

import (
	"math/big"
	"math/rand/v2"
	"testing"

	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/exact"
)

// TestScreenedMatchesDirect: the screened exact worst case equals the
// direct exact one, configuration included, for greedy and offset rules on
// seeded random models (the direct evaluator is the reference).
func TestScreenedMatchesDirect(t *testing.T) {
	rng := rand.New(rand.NewPCG(4, 2))
	for trial := 0; trial < 12; trial++ {
		n := 2 + trial%3
		l := exact.RandomLayout(t, rng, n, false)
		half := l.OffsetHalfSteps()
		for _, r := range []struct {
			name string
			rule exact.Rule
		}{{"greedy", exact.Greedy(n)}, {"offset", exact.Offset(half)}} {
			d := l.D + tables.OffsetWidth(half)
			a := exact.WorstCase(l, r.rule, d)
			b, err := exact.WorstCaseScreened(l, r.rule, d)
			if err != nil {
				t.Fatal(err)
			}
			if a.Regret.Cmp(b.Regret) != 0 {
				t.Errorf("trial %d %s: direct %v, screened %v", trial, r.name, a.Regret, b.Regret)
			}
			for i := range a.Values {
				if a.Values[i] != b.Values[i] {
					t.Errorf("trial %d %s: direct worst %v, screened %v", trial, r.name, a.Values, b.Values)
					break
				}
			}
		}
	}
}

// TestNoCellsIsOffsetRule: tables without cells pick as the offset rule
// does, sharing ties equally, at every reading where the channels the
// offset rule shares are not certainly below another channel of the top
// group (elsewhere they pick only such channels). Both sides are exact
// numerators, compared as fractions; a fallback that broke ties one way
// would differ at every tie.
func TestNoCellsIsOffsetRule(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 5))
	ties := 0
	for trial := 0; trial < 12; trial++ {
		n := 2 + trial%3
		l := exact.RandomLayout(t, rng, n, false)
		for _, half := range [][]int{nil, l.OffsetHalfSteps()} {
			o := tables.NewOptimal(l)
			o.Half = half
			et, err := exact.NewTable(o, 20)
			if err != nil {
				t.Fatal(err)
			}
			rule := exact.Offset(half)
			if half == nil {
				rule = exact.Greedy(n)
			}
			r := make([]int, n)
			a, b := make([]uint64, n), make([]uint64, n)
			for k := 0; k < 2000; k++ {
				for i := range r {
					r[i] = rng.IntN(9) - 4
				}
				rule.Nums(r, a)
				et.Nums(r, b)
				var shared tables.Set
				for i, x := range a {
					if x > 0 {
						shared |= tables.SetOf(i)
					}
				}
				alive := l.Alive(l.TopGroup(r), r)
				if shared&^alive != 0 {
					for i, x := range b {
						if x > 0 && !alive.Has(i) {
							t.Fatalf("trial %d, offsets %v, readings %v: the tables pick channel %d, certainly below another", trial, half, r, i)
						}
					}
					continue
				}
				if shared.Len() > 1 {
					ties++
				}
				for i := range a {
					// a_i/Den_a = b_i/Den_b
					if new(big.Int).Mul(new(big.Int).SetUint64(a[i]), new(big.Int).SetUint64(et.Den())).Cmp(
						new(big.Int).Mul(new(big.Int).SetUint64(b[i]), new(big.Int).SetUint64(rule.Den()))) != 0 {
						t.Fatalf("trial %d, offsets %v, readings %v: the offset rule %v/%d, the tables %v/%d", trial, half, r, a, rule.Den(), b, et.Den())
					}
				}
			}
		}
	}
	if ties == 0 {
		t.Fatal("no tie was checked")
	}
	t.Logf("%d ties checked", ties)
}

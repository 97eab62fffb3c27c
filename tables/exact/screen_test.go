package exact_test

import (
	"math/rand/v2"
	"testing"

	"github.com/pickwise/pickwise/discretize"
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
		m := &discretize.Model{Step: 1}
		for i := 0; i < n; i++ {
			k := 1 + rng.IntN(4)
			w := make([]float64, k)
			for j := range w {
				w[j] = 0.1 + rng.Float64()
			}
			p, err := discretize.Quantize(-rng.IntN(k), w)
			if err != nil {
				t.Fatal(err)
			}
			m.Channels = append(m.Channels, discretize.Channel{Name: "c", PMF: p})
		}
		l, err := tables.NewLayout(m)
		if err != nil {
			t.Fatal(err)
		}
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

package exact_test

import (
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

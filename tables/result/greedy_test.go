package result_test

import (
	"math/rand/v2"
	"testing"

	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/exact"
	"github.com/pickwise/pickwise/tables/result"
)

// TestGreedyTables: on models whose noise ranges all contain 0 (so no
// channel is certainly below another at equal readings), greedy written as
// tables has exactly the worst case of the greedy rule itself (the
// reference: exact.Greedy, evaluated directly), on seeded two- and
// three-channel models.
func TestGreedyTables(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 8))
	for trial := 0; trial < 8; trial++ {
		n := 2 + trial%2
		l, err := tables.NewLayout(randomModel(t, rng, n))
		if err != nil {
			t.Fatal(err)
		}
		gt, den := exact.Rationalize(result.GreedyTables(l), result.ProbBits)
		et, err := exact.NewTableDen(gt, den)
		if err != nil {
			t.Fatal(err)
		}
		got := exact.WorstCase(l, et, l.D)
		want := exact.WorstCase(l, exact.Greedy(n), l.D+result.GreedyWidth(l))
		if got.Regret.Cmp(want.Regret) != 0 {
			t.Errorf("trial %d (n=%d): greedy tables %v, greedy %v", trial, n, got.Regret, want.Regret)
		}
	}
}

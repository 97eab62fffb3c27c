package result

import (
	"math/rand/v2"
	"testing"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/exact"
)

// TestGreedyTables: on models whose noise ranges all contain 0 (so no
// channel is certainly below another at equal readings), greedy written as
// tables has exactly the worst case of the greedy rule itself (the
// reference: exact.Greedy, evaluated directly), at the same configuration.
func TestGreedyTables(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 8))
	for trial := 0; trial < 8; trial++ {
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
		gt, den := exact.Rationalize(greedyTables(l), ProbBits)
		et, err := exact.NewTableDen(gt, den)
		if err != nil {
			t.Fatal(err)
		}
		got := exact.WorstCase(l, et, l.D)
		want := exact.WorstCase(l, exact.Greedy(n), l.D+GreedyWidth(l))
		if got.Regret.Cmp(want.Regret) != 0 {
			t.Errorf("trial %d (n=%d): greedy tables %v, greedy %v", trial, n, got.Regret, want.Regret)
		}
	}
}

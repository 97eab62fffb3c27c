package fast_test

import (
	"math/rand/v2"
	"testing"

	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/fast"
)

// sevenPoint returns a 3-channel model with seeded random 7-point pmfs.
func sevenPoint(b *testing.B) *tables.Layout {
	rng := rand.New(rand.NewPCG(7, 7))
	return layout(b, randomModel(b, rng, 3, 7, 7))
}

// BenchmarkFastVsDirect times the worst case of greedy on a 3-channel
// model with 7-point pmfs by both evaluators.
func BenchmarkFastVsDirect(b *testing.B) {
	l := sevenPoint(b)
	b.Run("fast", func(b *testing.B) {
		for b.Loop() {
			if _, err := fast.WorstCase(l, tables.Greedy{}, l.D); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("direct", func(b *testing.B) {
		for b.Loop() {
			l.WorstCase(tables.Greedy{}, l.D)
		}
	})
}

// BenchmarkFastNormal times the worst case of greedy on three normal
// channels (sigma 0.8, 1.0 and 1.6 at step 0.1, tail 1e-6: pmfs of 79 to
// 157 points), far beyond the direct evaluator.
func BenchmarkFastNormal(b *testing.B) {
	l := layout(b, normalModel(b, 0.1, 1e-6, 0.8, 1.0, 1.6))
	var w tables.Worst
	for b.Loop() {
		var err error
		if w, err = fast.WorstCase(l, tables.Greedy{}, l.D); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(w.Configurations), "configs")
	b.Logf("D=%d, worst case %.6f steps at %v", l.D, w.Regret, w.Values)
}

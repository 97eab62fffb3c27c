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

// BenchmarkScanFive times a scan of every configuration of five channels
// with seeded random 5-point pmfs at the layout's gap bound (tens of
// millions of configurations), the work of one round of constraint
// generation, for greedy and for tables without cells (the offset rule
// behind a table rule's lookups). The rules give their probabilities a
// row at a time; "by vector" hides that, for comparison.
func BenchmarkScanFive(b *testing.B) {
	rng := rand.New(rand.NewPCG(5, 5))
	l := layout(b, randomModel(b, rng, 5, 4, 4))
	o := tables.NewOptimal(l)
	o.Half = l.OffsetHalfSteps()
	for _, bc := range []struct {
		name string
		rule tables.Rule
	}{
		{"greedy", tables.Greedy{}},
		{"tables", o},
		{"tables by vector", byVector{o}},
	} {
		b.Run(bc.name, func(b *testing.B) {
			var regs []float64
			for b.Loop() {
				regs = regs[:0]
				for _, q := range tables.Subsets(l.N()) {
					var err error
					regs, err = fast.Evaluator{}.Scan(l, bc.rule, q, l.D, regs, func(int, float64) bool { return false }, nil)
					if err != nil {
						b.Fatal(err)
					}
				}
			}
			b.ReportMetric(float64(len(regs)), "configs")
		})
	}
}

// byVector hides a rule's RowRule method.
type byVector struct{ r tables.Rule }

func (v byVector) Probs(r []int, p []float64) { v.r.Probs(r, p) }

package result_test

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables/result"
)

// benchModel returns the benchmark models of the core: two channels with
// 81-point Gaussian pmfs, or three channels with seeded random 7-point pmfs.
func benchModel(b *testing.B, name string) *discretize.Model {
	m := &discretize.Model{Step: 1}
	switch name {
	case "n2-gauss81":
		for i, s := range []float64{10, 14} {
			w := make([]float64, 81)
			for k := range w {
				x := float64(k - 40)
				w[k] = math.Exp(-x * x / (2 * s * s))
			}
			p, err := discretize.Quantize(-40, w)
			if err != nil {
				b.Fatal(err)
			}
			m.Channels = append(m.Channels, discretize.Channel{Name: string(rune('A' + i)), Kind: "pmf", PMF: p})
		}
	case "n3-pmf7":
		rng := rand.New(rand.NewPCG(7, 7))
		for i := 0; i < 3; i++ {
			w := make([]float64, 7)
			for k := range w {
				w[k] = 0.1 + rng.Float64()
			}
			p, err := discretize.Quantize(-rng.IntN(7), w)
			if err != nil {
				b.Fatal(err)
			}
			m.Channels = append(m.Channels, discretize.Channel{Name: string(rune('A' + i)), Kind: "pmf", PMF: p})
		}
	}
	return m
}

// BenchmarkSolve measures the end-to-end solve with certificate, and
// reports where the time goes: building the LP rows, the CLP solve, the
// exact certificate, and the exact greedy and offset figures.
func BenchmarkSolve(b *testing.B) {
	for _, name := range []string{"n2-gauss81", "n3-pmf7"} {
		b.Run(name, func(b *testing.B) {
			m := benchModel(b, name)
			var s *result.Solution
			for i := 0; i < b.N; i++ {
				var err error
				s, err = result.Solve(context.Background(), m, result.Options{})
				if err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(s.Timing.Build.Seconds(), "build-s")
			b.ReportMetric(s.Timing.Solve.Seconds(), "solve-s")
			b.ReportMetric(s.Timing.Certify.Seconds(), "certify-s")
			b.ReportMetric(s.Timing.Heuristics.Seconds(), "heuristics-s")
			b.ReportMetric(float64(s.Nonzeros), "nonzeros")
			b.ReportMetric(result.Float(s.Upper)-result.Float(s.Lower), "gap")
		})
	}
}

package clp_test

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"
	"time"

	"github.com/pickwise/pickwise/lp"
	"github.com/pickwise/pickwise/lp/clp"
)

// regretShaped returns a random LP with the shape of a minimax-regret LP:
// minimise t over t >= 0 and x[c][i] >= 0 (cells c, channels i), with
// sum_i x[c][i] = 1 for every cell and rows
//
//	sum over a window of cells of p * sum_i x[c][i] * gap_i - t <= 0,
//
// where p are random weights summing to 1 over the window and gap_i >= 0
// is zero for one channel. The data are invented; only the shape matters
// for timing. It is feasible (uniform x, large t) and bounded below by 0.
func regretShaped(rng *rand.Rand, cells, channels, rows, window int) *lp.Problem {
	p := &lp.Problem{}
	inf := math.Inf(1)
	p.AddCol(1, 0, inf) // t
	for range cells * channels {
		p.AddCol(0, 0, inf)
	}
	idx := make([]int, 0, window*channels+1)
	val := make([]float64, 0, window*channels+1)
	w := make([]float64, window)
	gap := make([]float64, channels)
	for range rows {
		idx, val = idx[:0], val[:0]
		start := rng.IntN(cells - window + 1)
		best := rng.IntN(channels)
		for i := range gap {
			gap[i] = float64(1 + rng.IntN(6))
		}
		gap[best] = 0
		sum := 0.0
		for k := range w {
			w[k] = math.Exp(-math.Pow(float64(k-window/2)/float64(window/4+1), 2))
			sum += w[k]
		}
		for k := range w {
			for i := range channels {
				if gap[i] == 0 {
					continue
				}
				idx = append(idx, 1+(start+k)*channels+i)
				val = append(val, w[k]/sum*gap[i])
			}
		}
		idx = append(idx, 0)
		val = append(val, -1)
		p.AddRow(idx, val, -inf, 0)
	}
	ones := make([]float64, channels)
	for i := range ones {
		ones[i] = 1
	}
	for c := range cells {
		for i := range channels {
			idx[i] = 1 + c*channels + i
		}
		p.AddRow(idx[:channels], ones, 1, 1)
	}
	return p
}

// BenchmarkLoadSolve loads and solves a regret-shaped LP with about 10^6
// nonzeros and reports load and solve times separately.
func BenchmarkLoadSolve(b *testing.B) {
	rng := rand.New(rand.NewPCG(7, 8))
	p := regretShaped(rng, 20000, 3, 12000, 40)
	b.Logf("%d rows, %d columns, %d nonzeros", p.NumRows(), p.NumCols(), p.NumNonzeros())
	for b.Loop() {
		t0 := time.Now()
		m, err := clp.NewModel(p)
		if err != nil {
			b.Fatal(err)
		}
		t1 := time.Now()
		sol, err := m.Solve(context.Background())
		if err != nil {
			b.Fatal(err)
		}
		t2 := time.Now()
		m.Close()
		b.ReportMetric(t1.Sub(t0).Seconds(), "load-s")
		b.ReportMetric(t2.Sub(t1).Seconds(), "solve-s")
		b.ReportMetric(float64(sol.Iterations), "iterations")
	}
}

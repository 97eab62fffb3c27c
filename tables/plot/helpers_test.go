package plot

import (
	"context"
	"math"
	"testing"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables/result"
)

// pmf returns the lattice pmf with the given weights from offset lo.
func pmf(t *testing.T, lo int, w ...float64) discretize.PMF {
	t.Helper()
	p, err := discretize.Quantize(lo, w)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// coinModel is the worked example of the design notes: channel A read
// exactly, channel B with noise -1 or +1 (reading units) with probability
// 1/2 each, at the given step (which must divide 1).
func coinModel(t *testing.T, step float64) *discretize.Model {
	t.Helper()
	k := int(math.Round(1 / step))
	w := make([]float64, 2*k+1)
	w[0], w[2*k] = 0.5, 0.5
	return &discretize.Model{Step: step, Unit: "dB", Channels: []discretize.Channel{
		{Name: "A", Kind: "exact", PMF: pmf(t, 0, 1)},
		{Name: "B", Kind: "pmf", PMF: pmf(t, -k, w...)},
	}}
}

// triModel is a three-channel model with three-point pmfs (demo data).
func triModel(t *testing.T) *discretize.Model {
	t.Helper()
	return &discretize.Model{Step: 0.1, Unit: "dB", Channels: []discretize.Channel{
		{Name: "A", Kind: "pmf", PMF: pmf(t, -1, 0.25, 0.5, 0.25)},
		{Name: "B", Kind: "pmf", PMF: pmf(t, -1, 0.5, 0, 0.5)},
		{Name: "C", Kind: "pmf", PMF: pmf(t, -1, 0.2, 0.3, 0.5)},
	}}
}

// quadModel is a four-channel model with two-point pmfs (demo data).
func quadModel(t *testing.T) *discretize.Model {
	t.Helper()
	return &discretize.Model{Step: 1, Unit: "mV", Channels: []discretize.Channel{
		{Name: "north", Kind: "pmf", PMF: pmf(t, 0, 0.5, 0.5)},
		{Name: "east", Kind: "pmf", PMF: pmf(t, -1, 0.3, 0.7)},
		{Name: "south", Kind: "exact", PMF: pmf(t, 0, 1)},
		{Name: "west", Kind: "pmf", PMF: pmf(t, -1, 0.5, 0.5)},
	}}
}

func solve(t *testing.T, m *discretize.Model) *result.Solution {
	t.Helper()
	sol, err := result.Solve(context.Background(), m, result.Options{})
	if err != nil {
		t.Fatal(err)
	}
	return sol
}

func maxOf(x []float64) float64 {
	m := math.Inf(-1)
	for _, v := range x {
		m = max(m, v)
	}
	return m
}

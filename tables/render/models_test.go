package render

import (
	"context"
	"math/big"
	"sync"
	"testing"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/result"
)

// pmf builds a lattice pmf from weights starting at offset lo (steps).
func pmf(t *testing.T, lo int, w ...float64) discretize.PMF {
	t.Helper()
	p, err := discretize.Quantize(lo, w)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// workedModel is the worked example at step h = 1/k: channel A read
// exactly, channel B with noise -1 or +1 (reading units), probability 1/2
// each.
func workedModel(t *testing.T, k int) *discretize.Model {
	t.Helper()
	w := make([]float64, 2*k+1)
	w[0], w[2*k] = 0.5, 0.5
	return &discretize.Model{Step: 1 / float64(k), Unit: "mm", Channels: []discretize.Channel{
		{Name: "A", Kind: discretize.KindExact, PMF: pmf(t, 0, 1)},
		{Name: "B", Kind: discretize.KindPMF, PMF: pmf(t, -k, w...)},
	}}
}

// workedSolution is the optimal table of the worked example at step 1/k,
// k = 1 or 2, derived by hand (design notes, "Check values from outside
// the project": a standard worked example of the field). With
// d = r_B - r_A: choose A when d < 0, B when d > 0, either with
// probability 1/2 at d = 0. The optimum is 1/4 (reading units).
//
// Derivation. Let x = v_B - v_A; B reads x - 1 or x + 1 with probability
// 1/2 each. Lower bound: at x = 1 the reading difference is 0 or 2 (B is
// forced at 2), at x = -1 it is -2 or 0 (A forced at -2); if B has
// probability q at d = 0 the regrets are (1 - q)/2 and q/2, so every rule
// has a worst case of at least 1/4. Upper bound: for x > 0 the regret is x
// times the probability of choosing A: x/2 for 0 < x < 1 (from d = x - 1
// < 0), 1/4 at x = 1 (from d = 0), 0 for x > 1; the worst over x > 0 is
// max(1/4, (1 - h)/2) = 1/4 for h = 1 and h = 1/2, and x < 0 is the
// mirror image.
func workedSolution(t *testing.T, k int) *result.Solution {
	t.Helper()
	m := workedModel(t, k)
	l, err := tables.NewLayout(m)
	if err != nil {
		t.Fatal(err)
	}
	o := tables.NewOptimal(l)
	tab := o.Table(tables.SetOf(0, 1))
	for d := -k; d <= k; d++ {
		p := []float64{0, 1}
		switch {
		case d < 0:
			p = []float64{1, 0}
		case d == 0:
			p = []float64{0.5, 0.5}
		}
		tab.Add([]int{0, d}, tables.SetOf(0, 1), p)
	}
	quarter := new(big.Rat).SetFrac64(int64(k), 4) // 1/4 unit in steps of 1/k
	return &result.Solution{Model: m, Layout: l, Tables: o, ProbBits: result.ProbBits,
		Lower: quarter, Upper: new(big.Rat).Set(quarter)}
}

// solved caches solutions of the small models the tests share.
var solved sync.Map

// solve returns result.Solve of the model that build returns, computed
// once per name.
func solve(t *testing.T, name string, build func(*testing.T) *discretize.Model) *result.Solution {
	t.Helper()
	if s, ok := solved.Load(name); ok {
		return s.(*result.Solution)
	}
	s, err := result.Solve(context.Background(), build(t), result.Options{})
	if err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	solved.Store(name, s)
	return s
}

// twoChannel is a 2-channel model on a decimal step with a unit and a
// name that needs escaping.
func twoChannel(t *testing.T) *discretize.Model {
	return &discretize.Model{Step: 0.1, Unit: "dB", Channels: []discretize.Channel{
		{Name: "reference <ref> & co", Kind: discretize.KindExact, PMF: pmf(t, 0, 1)},
		{Name: "probe|2", Kind: discretize.KindPMF, PMF: pmf(t, -1, 0.3, 0.45, 0.25)},
	}}
}

// threeChannel is a 3-channel model with 3-point pmfs.
func threeChannel(t *testing.T) *discretize.Model {
	return &discretize.Model{Step: 0.5, Unit: "°C", Channels: []discretize.Channel{
		{Name: "A", Kind: discretize.KindExact, PMF: pmf(t, 0, 1)},
		{Name: "B", Kind: discretize.KindPMF, PMF: pmf(t, -1, 0.5, 0, 0.5)},
		{Name: "C", Kind: discretize.KindPMF, PMF: pmf(t, -1, 0.25, 0.5, 0.25)},
	}}
}

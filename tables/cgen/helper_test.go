package cgen

import (
	"context"
	"sync"
	"testing"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables/result"
)

// pmf builds a lattice pmf from weights starting at offset lo.
func pmf(t *testing.T, lo int, w ...float64) discretize.PMF {
	t.Helper()
	p, err := discretize.Quantize(lo, w)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// twoModel is the worked example of the design notes (derived by hand): one
// channel read exactly, the other with noise -1 or +1 with probability 1/2
// each, at step 1. Its optimum is 1/4.
func twoModel(t *testing.T) *discretize.Model {
	return &discretize.Model{Step: 1, Channels: []discretize.Channel{
		{Name: "exact", Kind: "exact", PMF: pmf(t, 0, 1)},
		{Name: "coin", Kind: "pmf", PMF: pmf(t, -1, 0.5, 0, 0.5)},
	}}
}

// threeModel has three channels with binomial noise pmfs of 3, 5 and 4
// points (Binomial(2, 1/2) - 1, Binomial(4, 1/2) - 2, Binomial(3, 1/2) - 1:
// the common practice of approximating bell-shaped noise on a lattice by a
// centred binomial; the last is off centre), at step 1 so that steps and
// reading units agree.
func threeModel(t *testing.T) *discretize.Model {
	return &discretize.Model{Step: 1, Unit: "dB", Channels: []discretize.Channel{
		{Name: "a", Kind: "pmf", PMF: pmf(t, -1, 1, 2, 1)},
		{Name: "b", Kind: "pmf", PMF: pmf(t, -2, 1, 4, 6, 4, 1)},
		{Name: "c", Kind: "pmf", PMF: pmf(t, -1, 1, 3, 3, 1)},
	}}
}

var solved struct {
	sync.Mutex
	sols map[string]*result.Solution
}

// solve returns the solution of the named test model, solving it once per
// test binary.
func solve(t *testing.T, name string) *result.Solution {
	t.Helper()
	solved.Lock()
	defer solved.Unlock()
	if s, ok := solved.sols[name]; ok {
		return s
	}
	var m *discretize.Model
	switch name {
	case "two":
		m = twoModel(t)
	case "three":
		m = threeModel(t)
	default:
		t.Fatalf("no test model %q", name)
	}
	s, err := result.Solve(context.Background(), m, result.Options{})
	if err != nil {
		t.Fatalf("model %s: %v", name, err)
	}
	if solved.sols == nil {
		solved.sols = make(map[string]*result.Solution)
	}
	solved.sols[name] = s
	return s
}

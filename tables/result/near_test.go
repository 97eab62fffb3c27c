package result_test

import (
	"math/big"
	"testing"

	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/exact"
	"github.com/pickwise/pickwise/tables/fast"
	"github.com/pickwise/pickwise/tables/result"
)

// TestNearChecks: nearHolds accepts tables whose snapped probabilities
// are the float ones, and refuses them when a cell moves by enough to
// lift a configuration outside the margin to the worst case; noBetter
// says greedy's tables are no better than a rule only when their exact
// worst case, over every configuration, is at least its worst case.
func TestNearChecks(t *testing.T) {
	l, err := tables.NewLayout(model(t, 1, []float64{-1, 0.2, 0.5, 0.3}, []float64{0, 0.6, 0.4}, []float64{-1, 0.3, 0.1, 0.6}))
	if err != nil {
		t.Fatal(err)
	}
	g := result.GreedyTables(l)
	fw, err := fast.WorstCase(l, g, l.D)
	if err != nil {
		t.Fatal(err)
	}
	snapped, den := exact.Rationalize(g, result.ProbBits)
	if !result.NearHolds(l, g, snapped, fw.Regret) {
		t.Error("greedy's tables, exact fractions already, do not hold their own near configurations")
	}
	moved, _ := exact.Rationalize(g, result.ProbBits)
	for _, tb := range moved.Tables {
		for c := range tb.Cells {
			p := tb.Cells[c].P
			if len(p) >= 2 && p[0] >= 0.25 {
				p[0], p[1] = p[0]-0.25, p[1]+0.25
			}
		}
	}
	if result.NearHolds(l, g, moved, fw.Regret) {
		t.Error("tables moved by a quarter in some cells still hold the near configurations")
	}

	et, err := exact.NewTableDen(snapped, den)
	if err != nil {
		t.Fatal(err)
	}
	full := exact.WorstCase(l, et, l.D)
	near := [][]int{full.Values}
	for _, tc := range []struct {
		name string
		w    *big.Rat
		want bool
	}{
		{"at greedy's worst case", full.Regret, true},
		{"below it", new(big.Rat).Quo(full.Regret, big.NewRat(2, 1)), true},
		{"above it", new(big.Rat).Add(full.Regret, big.NewRat(1, 1<<40)), false},
	} {
		if got := result.NoBetter(l, g, near, tc.w); got != tc.want {
			t.Errorf("%s: noBetter %v, want %v", tc.name, got, tc.want)
		}
	}
	if result.NoBetter(l, g, nil, new(big.Rat)) {
		t.Error("noBetter without configurations said greedy is no better")
	}
}

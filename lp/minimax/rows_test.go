package minimax

import (
	"math"
	"math/rand/v2"
	"reflect"
	"slices"
	"testing"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/lp"
	"github.com/pickwise/pickwise/tables"
)

// TestAddRegretRowsMatchesOneByOne: rows added in parallel batches give
// the same formulation, bit for bit (cells, columns, rows, coefficients),
// as rows added one configuration at a time, with and without a symmetry.
func TestAddRegretRowsMatchesOneByOne(t *testing.T) {
	for _, tc := range []struct {
		name string
		pmfs [][]float64
	}{
		{"skewed", [][]float64{{-3, 0.11, 0.16, 0.2, 0.19, 0.34}, {0, 0.28, 0.1, 0.08, 0.26, 0.28}, {-3, 0.15, 0.16, 0.48, 0.08, 0.13}}},
		{"two identical", [][]float64{{-1, 0.2, 0.5, 0.3}, {-1, 0.2, 0.5, 0.3}, {0, 0.6, 0.4}}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			l := pmfLayout(t, tc.pmfs...)
			vs := allConfigs(l)
			// Interleave the subsets so that batches mix them.
			for i := range vs {
				j := (i * 7919) % len(vs)
				vs[i], vs[j] = vs[j], vs[i]
			}
			one := newFormulation(l, false)
			alsoOne := &lp.Problem{}
			for _, v := range vs {
				one.addRegretRows([][]int{canonical(one, v)}, alsoOne)
			}
			batch := newFormulation(l, false)
			alsoBatch := &lp.Problem{}
			for lo := 0; lo < len(vs); lo += 13 {
				var part [][]int
				for _, v := range vs[lo:min(lo+13, len(vs))] {
					part = append(part, canonical(batch, v))
				}
				batch.addRegretRows(part, alsoBatch)
			}
			if one.Symmetric() != (tc.name == "two identical") {
				t.Fatalf("symmetric %v", one.Symmetric())
			}
			if !reflect.DeepEqual(one.Problem, batch.Problem) || !reflect.DeepEqual(alsoOne, alsoBatch) {
				t.Error("the problems differ")
			}
			if !reflect.DeepEqual(one.Vars, batch.Vars) || !reflect.DeepEqual(one.RowOf, batch.RowOf) || !reflect.DeepEqual(one.Configs, batch.Configs) {
				t.Error("the variables, rows or configurations differ")
			}
			for i, tb := range one.Tables.Tables {
				if !reflect.DeepEqual(tb.Cells, batch.Tables.Tables[i].Cells) {
					t.Errorf("table %v: cells differ", tb.Members)
				}
			}
			t.Logf("%d configurations, %d columns", len(vs), one.Problem.NumCols())
		})
	}
}

// pmfLayout returns the layout of a model at step 1 whose channels have
// the lattice pmfs given as (lowest point, weights...).
func pmfLayout(t *testing.T, pmfs ...[]float64) *tables.Layout {
	t.Helper()
	m := &discretize.Model{Step: 1}
	for i, p := range pmfs {
		q, err := discretize.Quantize(int(p[0]), p[1:])
		if err != nil {
			t.Fatal(err)
		}
		m.Channels = append(m.Channels, discretize.Channel{Name: string(rune('A' + i)), Kind: "pmf", PMF: q})
	}
	l, err := tables.NewLayout(m)
	if err != nil {
		t.Fatal(err)
	}
	return l
}

// allConfigs returns every configuration of l, subset by subset.
func allConfigs(l *tables.Layout) [][]int {
	var vs [][]int
	for _, q := range tables.Subsets(l.N()) {
		tables.Configurations(l.N(), q, l.D, func(v []int) bool {
			vs = append(vs, append([]int(nil), v...))
			return true
		})
	}
	return vs
}

// canonical returns the configuration whose row stands for v's orbit.
func canonical(f *Formulation, v []int) []int {
	if f.sym == nil {
		return v
	}
	w := make([]int, len(v))
	f.sym.canonConfig(v, w)
	return w
}

// TestReachedColumns: the cells that reachedColumns marks for a prior are
// those found by walking every noise outcome of the prior's configurations
// through the tables (tables.Optimal.Locate on the readings, the joint
// outcomes from each channel's own pmf): cells where some alive choice has
// a regret. Every column of a cell gets its cell's mark.
func TestReachedColumns(t *testing.T) {
	l := pmfLayout(t, []float64{-2, 0.11, 0.16, 0.2, 0.19, 0.34}, []float64{0, 0.28, 0.1, 0.08, 0.26, 0.28}, []float64{-1, 0.5, 0.2, 0.3})
	f := newFormulation(l, true)
	f.addRegretRows(allConfigs(l), nil)
	f.addCellRowsFrom(1, nil)
	// The prior weighs configurations of spread 4 steps at most: wider
	// ones reach few cells.
	var tight []int
	for k := range f.NumConfigs() {
		v := f.Config(k)
		lo, hi := math.MaxInt, math.MinInt
		for _, x := range v {
			if x != tables.Far {
				lo, hi = min(lo, x), max(hi, x)
			}
		}
		if hi-lo <= 4 {
			tight = append(tight, k)
		}
	}
	rng := rand.New(rand.NewPCG(3, 8))
	for trial := range 4 {
		prior := make([]float64, f.NumConfigs())
		for range 1 + trial*3 {
			prior[tight[rng.IntN(len(tight))]] = 1
		}
		type cellKey struct {
			g    tables.Set
			cell int
		}
		want := make(map[cellKey]bool)
		r := make([]int, l.N())
		for k, w := range prior {
			if w == 0 {
				continue
			}
			v := f.Config(k)
			top := slices.Max(v)
			// Every joint outcome of the channels in the subset.
			var walk func(i int, prob float64)
			walk = func(i int, prob float64) {
				if i == l.N() {
					_, alive, tb, ci := f.Tables.Locate(r)
					if tb == nil || ci < 0 || prob == 0 {
						return
					}
					for _, ch := range tb.Members {
						if alive.Has(ch) && v[ch] != top {
							want[cellKey{tb.Group, ci}] = true
						}
					}
					return
				}
				if v[i] == tables.Far {
					r[i] = tables.Far
					walk(i+1, prob)
					return
				}
				for e := l.Lo[i]; e <= l.Hi[i]; e++ {
					r[i] = v[i] + e
					walk(i+1, prob*l.P[i][e-l.Lo[i]])
				}
			}
			walk(0, 1)
		}
		got := f.reachedColumns(prior)
		marked := 0
		for j := 1; j < len(got); j++ {
			vr := f.Vars[j-1]
			if w := want[cellKey{vr.Group, int(vr.Cell)}]; got[j] != w {
				t.Errorf("trial %d: column %d (group %v, cell %d): reached %v, want %v", trial, j, vr.Group, vr.Cell, got[j], w)
			}
			if got[j] {
				marked++
			}
		}
		if marked == 0 || marked == len(got)-1 {
			t.Errorf("trial %d: %d of %d columns marked", trial, marked, len(got)-1)
		}
	}
}

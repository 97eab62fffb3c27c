package minimax

import (
	"reflect"
	"testing"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/lp"
	"github.com/pickwise/pickwise/tables"
)

// TestAddRegretRowsMatchesOneByOne: rows added in parallel batches give
// the same formulation, bit for bit (cells, columns, rows, coefficients),
// as rows added one configuration at a time, with and without a symmetry.
func TestAddRegretRowsMatchesOneByOne(t *testing.T) {
	pmf := func(lo int, p ...float64) discretize.PMF {
		q, err := discretize.Quantize(lo, p)
		if err != nil {
			t.Fatal(err)
		}
		return q
	}
	for _, tc := range []struct {
		name string
		pmfs []discretize.PMF
	}{
		{"skewed", []discretize.PMF{pmf(-3, 0.11, 0.16, 0.2, 0.19, 0.34), pmf(0, 0.28, 0.1, 0.08, 0.26, 0.28), pmf(-3, 0.15, 0.16, 0.48, 0.08, 0.13)}},
		{"two identical", []discretize.PMF{pmf(-1, 0.2, 0.5, 0.3), pmf(-1, 0.2, 0.5, 0.3), pmf(0, 0.6, 0.4)}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			m := &discretize.Model{Step: 1}
			for i, p := range tc.pmfs {
				m.Channels = append(m.Channels, discretize.Channel{Name: string(rune('A' + i)), Kind: "pmf", PMF: p})
			}
			l, err := tables.NewLayout(m)
			if err != nil {
				t.Fatal(err)
			}
			var vs [][]int
			for _, q := range tables.Subsets(l.N()) {
				tables.Configurations(l.N(), q, l.D, func(v []int) bool {
					vs = append(vs, append([]int(nil), v...))
					return true
				})
			}
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

// canonical returns the configuration whose row stands for v's orbit.
func canonical(f *Formulation, v []int) []int {
	if f.sym == nil {
		return v
	}
	w := make([]int, len(v))
	f.sym.canonConfig(v, w)
	return w
}

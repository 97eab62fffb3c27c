package result

import (
	"github.com/pickwise/pickwise/tables"
)

// GreedyTables returns the greedy rule written as decision tables: one cell
// for every reading vector of a group at which two or more channels not
// certainly below another share the top reading, sharing equally among
// them. Every other reading picks the highest reading, as a table rule does
// where it has no cell. Where greedy would give a share to a channel that
// is certainly below another, the tables give it nothing, which never
// raises a regret; the certificate evaluates the tables as written.
func GreedyTables(l *tables.Layout) *tables.Optimal {
	n := l.N()
	o := tables.NewOptimal(l)
	r := make([]int, n)
	p := make([]float64, n)
	for _, g := range tables.Subsets(n) {
		mem := g.Members()
		span := l.T * (len(mem) - 1)
		t := o.Table(g)
		// Every set of tied members reads 0; the others read below it.
		for tied := tables.Set(1); tied <= g; tied++ {
			if tied&g != tied || tied.Len() < 2 {
				continue
			}
			var rest []int
			for _, c := range mem {
				if !tied.Has(c) {
					rest = append(rest, c)
				}
			}
			for i := range r {
				r[i] = tables.Far
			}
			for _, c := range mem {
				if tied.Has(c) {
					r[c] = 0
				}
			}
			var rec func(k int)
			rec = func(k int) {
				if k < len(rest) {
					for x := -span; x <= -1; x++ {
						r[rest[k]] = x
						rec(k + 1)
					}
					return
				}
				if l.TopGroup(r) != g {
					return
				}
				alive := l.Alive(g, r)
				share := alive & tied
				if share.Len() < 2 {
					return
				}
				for k, c := range t.Members {
					p[k] = 0
					if share.Has(c) {
						p[k] = 1 / float64(share.Len())
					}
				}
				t.Add(r, alive, p[:len(t.Members)])
			}
			rec(0)
		}
	}
	return o
}

package minimax

import (
	"math"
	"runtime"
	"slices"
	"sync"
	"sync/atomic"

	"github.com/pickwise/pickwise/lp"
	"github.com/pickwise/pickwise/tables"
)

// rowScratch is the work space of one goroutine that computes regret rows
// of cells already in the tables.
type rowScratch struct {
	r       []int
	acc     []float64
	touched []int
}

// missing is an outcome of a configuration whose cell is not yet in the
// tables: its readings, top group and alive channels.
type missing struct {
	r        []int
	g, alive tables.Set
}

// existingRow computes the regret row of configuration v (without the -t
// entry: column indices in increasing order, coefficients, and the
// constant of the forced outcomes) from the cells already in the tables.
// When outcomes reach cells not yet there it returns ok false and, with
// record, those outcomes in order.
func (f *Formulation) existingRow(v []int, sc *rowScratch, record bool) (idx []int, val []float64, forced float64, miss []missing, ok bool) {
	l := f.Layout
	n := l.N()
	q := tables.SubsetOf(v)
	top := slices.Max(v)
	r := sc.r
	diff := f.diffs[q]
	ok = true
	for k := 0; k < diff.Len(); k++ {
		a, prob := diff.Point(k), diff.Prob[k]
		for i := range r {
			r[i] = v[i] + a[i]
		}
		g := l.TopGroup(r)
		alive := g
		if g.Len() > 1 {
			alive = l.Alive(g, r)
		}
		if alive.Len() == 1 {
			for i := 0; i < n; i++ {
				if alive.Has(i) {
					forced += prob * float64(top-v[i])
				}
			}
			continue
		}
		t := f.Tables.Table(g)
		ci := t.Lookup(r)
		if ci < 0 {
			ok = false
			if !record {
				break
			}
			miss = append(miss, missing{append([]int(nil), r...), g, alive})
			continue
		}
		if !ok {
			continue
		}
		m := len(t.Members)
		cols := f.cols[g][ci*m : (ci+1)*m]
		for k, ch := range t.Members {
			if !alive.Has(ch) {
				continue
			}
			if d := top - v[ch]; d != 0 {
				col := cols[k]
				if sc.acc[col] == 0 {
					sc.touched = append(sc.touched, int(col))
				}
				sc.acc[col] += prob * float64(d)
			}
		}
	}
	slices.Sort(sc.touched)
	for _, c := range sc.touched {
		if ok && sc.acc[c] != 0 {
			idx = append(idx, c)
			val = append(val, sc.acc[c])
		}
		sc.acc[c] = 0
	}
	sc.touched = sc.touched[:0]
	return idx, val, forced, miss, ok
}

// addRegretRows appends the regret rows (with their -t entries) of
// configurations vs to the problem, and to also when it is not nil, and
// records the configurations. Cells met for the first time are added, one
// configuration after the other and each's in the order of its outcomes,
// so the formulation does not depend on how configurations are split into
// calls. The rows are computed in parallel: first every row whose cells
// all exist, then, after the new cells are added, the others.
func (f *Formulation) addRegretRows(vs [][]int, also *lp.Problem) {
	if len(vs) == 0 {
		return
	}
	for _, v := range vs {
		f.differences(tables.SubsetOf(v)) // fills the cache, serially
	}
	type row struct {
		idx    []int
		val    []float64
		forced float64
		miss   []missing
		ok     bool
	}
	rows := make([]row, len(vs))
	compute := func(todo []int, record bool) {
		workers := min(runtime.GOMAXPROCS(0), len(todo))
		n := f.Layout.N()
		cols := f.Problem.NumCols()
		for len(f.scratch) < workers {
			f.scratch = append(f.scratch, &rowScratch{r: make([]int, n)})
		}
		var next atomic.Int64
		var wg sync.WaitGroup
		for w := range workers {
			sc := f.scratch[w]
			if len(sc.acc) < cols {
				// Zero beyond its old length, like the rest after use.
				sc.acc = append(sc.acc, make([]float64, cols-len(sc.acc))...)
			}
			wg.Add(1)
			go func() {
				defer wg.Done()
				for {
					k := int(next.Add(1)) - 1
					if k >= len(todo) {
						return
					}
					i := todo[k]
					x := &rows[i]
					x.idx, x.val, x.forced, x.miss, x.ok = f.existingRow(vs[i], sc, record)
				}
			}()
		}
		wg.Wait()
	}
	all := make([]int, len(vs))
	for i := range all {
		all[i] = i
	}
	compute(all, true)
	var again []int
	for i := range rows {
		if rows[i].ok {
			continue
		}
		again = append(again, i)
		for _, ms := range rows[i].miss {
			if f.Tables.Table(ms.g).Lookup(ms.r) < 0 {
				f.addOrbit(ms.g, ms.alive, ms.r)
			}
		}
		rows[i].miss = nil
	}
	compute(again, false)
	for i, v := range vs {
		x := &rows[i]
		x.idx = append(x.idx, 0)
		x.val = append(x.val, -1)
		f.RowOf = append(f.RowOf, f.Problem.AddRow(x.idx, x.val, math.Inf(-1), -x.forced))
		if also != nil {
			also.AddRow(x.idx, x.val, math.Inf(-1), -x.forced)
		}
		f.Configs = append(f.Configs, v...)
		rows[i] = row{}
	}
}

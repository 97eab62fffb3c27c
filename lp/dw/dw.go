// Package dw solves minimax linear programs over a product of simplices by
// Dantzig–Wolfe decomposition.
//
// The programs it takes have the form
//
//	minimise    t + c·x
//	subject to  a_v·x - t <= b_v          for every linking row v
//	            sum_j m_j x_j = 1         over the columns j of each block
//	            x >= 0
//
// with t in column 0 and column costs c >= 0 (zero unless SetCosts says
// otherwise). Every column other than t belongs to exactly one
// block, whose row has positive coefficients m_j and right-hand side 1: the
// feasible x form a product of simplices, one per block, and their extreme
// points are the choices of one column per block ("pure" points). The
// minimax-regret LPs of pickwise have this form: a block is a table cell, a
// linking row is the regret of a configuration.
//
// Instead of handing the whole program to a simplex code, whose rows can
// hold tens of thousands of entries each, a Model keeps a small master
// program over the priors π on the linking rows (Kelley's cutting planes
// on the concave function π ↦ min_x Σ_v π_v (a_v·x - b_v), stabilised by
// Wentges' smoothing):
//
//	maximise    σ
//	subject to  σ <= Σ_v π_v R_j(v)   for every pure point j found so far
//	            Σ_v π_v = 1, π >= 0
//
// where R_j(v) = a_v·x^j - b_v (plus c·x^j). The pure point that minimises the prior's
// expected row value is found block by block (pricing), and its value is a
// lower bound on the program's optimum; the master's optimum σ is an upper
// bound, reached by the mixture of pure points that the master's duals
// give. A solve ends when the two meet within the tolerance. The master is
// solved by COIN-OR CLP (lp/clp) and grows by one row per pure point.
package dw

import (
	"context"
	"errors"
	"fmt"
	"math"
	"runtime"
	"slices"
	"sort"
	"sync"
	"sync/atomic"

	"github.com/pickwise/pickwise/lp"
	"github.com/pickwise/pickwise/lp/clp"
)

// Model is a minimax program of the package's form, solved by
// decomposition. Rows and columns can be appended between solves; pure
// points found earlier are kept and extended to new blocks, so later
// solves start where earlier ones ended. A Model is not safe for concurrent
// use.
type Model struct {
	// Tol is the relative tolerance of a solve: it ends when the master's
	// optimum exceeds the best lower bound by at most
	// Tol*max(1, |optimum|). Zero means 1e-11.
	Tol float64
	// Smoothing is Wentges' weight of the best prior so far in the prior
	// that is priced: 0 is Kelley's plain cutting planes. A positive
	// value fixes the weight; a negative value means 0. Zero means an
	// adaptive weight: it starts at 0.5 and, after every pricing at a
	// smoothed prior, falls by 0.1 (to at least 0.1) when the dual
	// function still rises from there towards the master's prior (the
	// subgradient's slope along the step from the best prior to the
	// master's is positive) and otherwise rises a tenth of the way to
	// 1 (at most 0.99): the self-adjusting smoothing of Pessoa, Sadykov,
	// Uchoa and Vanderbeck (INFORMS J. Computing 30(2), 2018).
	// (Constraint generation on three channels of normal noise at step
	// 0.1: 15 rounds and 44 s instead of 25 rounds and 71 s with 0.5;
	// four channels with 15-point pmfs: 181 s instead of 199 s. From
	// scratch on fixed working sets the gain is less clear: 16.7 s
	// instead of 18.9 s on four channels (1,281 rows), 15.5 s instead
	// of 8.6 s on three channels of normal noise (1,454 rows); most of
	// the gain above is in the rounds' rules, which move with the
	// master's round-off.)
	Smoothing float64
	// MaxIterations bounds the pricing rounds of one solve (zero: 100000).
	MaxIterations int
	// MaxCuts bounds the master within a solve: past this many cuts the
	// cuts its solution does not use are dropped (but the newest) and it
	// is rebuilt. Zero means 128 per part of the blocks.
	MaxCuts int

	ncols int     // columns of the program, t included
	block []int32 // block of each column (-1: t, or not yet in a block)
	mult  []float64

	// blocks, in the order their rows came: columns and program row.
	bstart []int   // block k has columns bcols[bstart[k]:bstart[k+1]]
	bcols  []int32 // columns of the blocks
	brow   []int   // program row of each block

	// linking rows: right-hand side, program row.
	lb   []float64
	lrow []int

	nrows int // rows of the program

	// The linking rows' entries (without t), column by column: column j
	// has entries crow[cstart[j]:cstart[j+1]], in increasing row order.
	// Rows added since the last merge wait in pstart, pidx and pval, row
	// by row (see merge).
	cstart []int
	crow   []int32
	cval   []float64
	pstart []int
	pidx   []int32
	pval   []float64
	// The merged rows again, row by row: row v has entries
	// rcol[rstart[v]:rstart[v+1]], in increasing column order. Pricing
	// reads them when the prior weighs few rows (see columnCosts).
	rstart []int
	rcol   []int32
	rval   []float64

	cuts     []*cut // the master's cut rows, in order
	master   *clp.Model
	stale    bool // the master must be rebuilt before the next solve
	rebuilds int  // masters built so far

	center []float64 // the prior of the best lower bound, per linking row
	bestLB float64
	iters  int
	cost   []float64 // scratch: reduced cost per column
	avg    []float64 // cost per column under the uniform prior (nil: to compute)
	prefer func(col int) float64
	pref   []float64 // prefer's score per column, as far as computed
	// base is the first point: the preferred columns', or the one priced
	// at the uniform prior. Its cuts in every part stay in the master.
	base       *point
	baseBlocks int // blocks the base point's choices were made for

	partOf func(col int) int
	label  map[int]int32 // partOf's labels to part indices
	bpart  []int32       // part of each block, as far as computed
	pblock [][]int32     // the blocks of each part, in order
	nparts int

	costs    []float64 // per column, as far as set (see SetCosts)
	newCosts bool      // costs changed since the last solve
}

// A solve whose master has not moved for stallRounds solves in a row ends
// when the master's optimum is within stallTol (relative) of the best
// lower bound, however fine Model.Tol is: the master's simplex
// tolerances, below which new cuts need not move its solution.
// (Four channels with 15-point pmfs and a working set with near-duplicate
// rows: without this a solve sat at a relative gap of 2.5e-11 for
// thousands of pricing rounds, the master taking no iteration.)
const (
	stallRounds = 3
	stallTol    = 1e-10
)

// Parts splits the blocks into parts, by the label partOf gives a block's
// first column: the master then mixes pure points part by part (a
// disaggregated master), which needs fewer pricing rounds. Without it all
// blocks form one part.
func (m *Model) Parts(partOf func(col int) int) { m.partOf = partOf }

// Prefer sets the order in which ties of pricing are broken: of the
// columns of a block that are cheapest under the prior, the one with the
// least score(col) is chosen. Without it, ties go to the column cheapest
// on average over all linking rows.
func (m *Model) Prefer(score func(col int) float64) { m.prefer = score }

// point is a pure point: the chosen position in each block.
type point struct {
	pick []uint8
}

// cut is the part of a pure point in one part of the blocks, with its row
// values: r[v] = a_v·x restricted to the part's blocks (without b_v).
type cut struct {
	k      float64 // the point's cost c·x in the part
	pt     *point
	part   int32
	r      []float64
	sticky bool // kept by prune whatever its weight
}

// New returns a model of program p (see the package comment for the form
// it must have).
func New(p *lp.Problem) (*Model, error) {
	m := &Model{bestLB: math.Inf(-1)}
	if len(p.Obj) == 0 {
		return nil, errors.New("dw: the program has no columns")
	}
	if p.Obj[0] != 1 || !math.IsInf(p.ColUp[0], 1) {
		return nil, fmt.Errorf("dw: column 0 must be t, with cost 1 and no upper bound (cost %g, upper bound %g)", p.Obj[0], p.ColUp[0])
	}
	if err := m.AddColumns(p.ColLo[1:], p.ColUp[1:], p.Obj[1:]); err != nil {
		return nil, err
	}
	m.ncols++ // t
	m.block = append([]int32{-1}, m.block...)
	m.mult = append([]float64{0}, m.mult...)
	if err := m.AddRows(p); err != nil {
		return nil, err
	}
	return m, nil
}

// AddColumns appends len(lo) columns x_j with bounds [0, +inf) and cost 0
// (the only ones the form allows); a later AddRows must put each in a
// block.
func (m *Model) AddColumns(lo, up, obj []float64) error {
	if len(up) != len(lo) || len(obj) != len(lo) {
		return fmt.Errorf("dw: adding columns: %d lower bounds, %d upper bounds, %d costs", len(lo), len(up), len(obj))
	}
	for k := range lo {
		if lo[k] != 0 || !math.IsInf(up[k], 1) || obj[k] != 0 {
			return fmt.Errorf("dw: column %d has bounds [%g, %g] and cost %g; want [0, +Inf) and 0", m.ncols+k, lo[k], up[k], obj[k])
		}
	}
	m.ncols += len(lo)
	for range lo {
		m.block = append(m.block, -1)
		m.mult = append(m.mult, 0)
	}
	return nil
}

// AddRows appends the rows of p (its columns are ignored): each is either a
// linking row (t's entry -1, no lower bound) or the row of a new block
// (equal to 1, positive coefficients on columns in no block yet).
func (m *Model) AddRows(p *lp.Problem) error {
	for i := range p.NumRows() {
		lo, up := p.RowLo[i], p.RowUp[i]
		idx, val := p.Index[p.RowStart[i]:p.RowStart[i+1]], p.Value[p.RowStart[i]:p.RowStart[i+1]]
		row := m.nrows + i
		linking := false
		for e, j := range idx {
			if j < 0 || int(j) >= m.ncols {
				return fmt.Errorf("dw: row %d: column %d out of range (%d columns)", row, j, m.ncols)
			}
			if j == 0 {
				if val[e] != -1 {
					return fmt.Errorf("dw: row %d: t has coefficient %g, want -1", row, val[e])
				}
				linking = true
			}
		}
		if linking {
			if !math.IsInf(lo, -1) || math.IsInf(up, 0) || math.IsNaN(up) {
				return fmt.Errorf("dw: linking row %d has bounds [%g, %g]; want (-Inf, finite]", row, lo, up)
			}
			if len(m.pstart) == 0 {
				m.pstart = append(m.pstart, 0)
			}
			for e, j := range idx {
				if j != 0 {
					m.pidx = append(m.pidx, j)
					m.pval = append(m.pval, val[e])
				}
			}
			m.pstart = append(m.pstart, len(m.pidx))
			m.lb = append(m.lb, up)
			m.lrow = append(m.lrow, row)
			continue
		}
		if lo != 1 || up != 1 {
			return fmt.Errorf("dw: block row %d has bounds [%g, %g]; want [1, 1]", row, lo, up)
		}
		if len(idx) == 0 || len(idx) > math.MaxUint8 {
			return fmt.Errorf("dw: block row %d has %d columns; want 1 to %d", row, len(idx), math.MaxUint8)
		}
		b := int32(len(m.brow))
		if len(m.bstart) == 0 {
			m.bstart = append(m.bstart, 0)
		}
		for e, j := range idx {
			if m.block[j] >= 0 {
				return fmt.Errorf("dw: block row %d: column %d is already in block row %d", row, j, m.brow[m.block[j]])
			}
			if !(val[e] > 0) || math.IsInf(val[e], 1) {
				return fmt.Errorf("dw: block row %d: column %d has coefficient %g; want positive", row, j, val[e])
			}
			m.block[j] = b
			m.mult[j] = val[e]
			m.bcols = append(m.bcols, j)
		}
		m.bstart = append(m.bstart, len(m.bcols))
		m.brow = append(m.brow, row)
		// Points found before the block existed choose its first column.
		for _, pt := range m.allPoints() {
			pt.pick = append(pt.pick, 0)
		}
	}
	m.nrows += p.NumRows()
	m.stale = true
	m.avg = nil
	return nil
}

// SetCosts sets the costs c of the columns (see the package comment) for
// the solves that follow: c[j] for the columns j < len(c), zero for the
// others (t's entry, c[0], must be zero). Costs that change start the next
// solve's lower bound afresh, from the prior of the last one.
func (m *Model) SetCosts(c []float64) error {
	for j, x := range c {
		if j >= m.ncols {
			return fmt.Errorf("dw: costs for %d columns; the program has %d", len(c), m.ncols)
		}
		if !(x >= 0) || math.IsInf(x, 1) || (j == 0 && x != 0) {
			return fmt.Errorf("dw: column %d has cost %g; want finite, non-negative, and 0 for t", j, x)
		}
	}
	// Trailing zeros do not count.
	n := len(c)
	for n > 0 && c[n-1] == 0 {
		n--
	}
	if slices.Equal(c[:n], m.costs) {
		return nil
	}
	m.costs = slices.Clone(c[:n])
	m.newCosts = true
	return nil
}

// SetTolerance sets Tol.
func (m *Model) SetTolerance(tol float64) { m.Tol = tol }

// pointCosts returns, per part, the cost c·x of pure point pt over the
// part's blocks.
func (m *Model) pointCosts(pt *point) []float64 {
	out := make([]float64, m.nparts)
	if len(m.costs) == 0 {
		return out
	}
	for p := range out {
		if p >= len(m.pblock) {
			continue
		}
		for _, b := range m.pblock[p] {
			j := m.bcols[m.bstart[b]+int(pt.pick[b])]
			if int(j) < len(m.costs) {
				out[p] += m.costs[j] / m.mult[j]
			}
		}
	}
	return out
}

// Close frees the master program.
func (m *Model) Close() {
	if m.master != nil {
		m.master.Close()
		m.master = nil
	}
}

// nlink returns the number of linking rows.
func (m *Model) nlink() int { return len(m.lb) }

// check reports a column that is in no block.
func (m *Model) check() error {
	for j := 1; j < m.ncols; j++ {
		if m.block[j] < 0 {
			return fmt.Errorf("dw: column %d is in no block", j)
		}
	}
	if m.nlink() == 0 {
		return errors.New("dw: the program has no linking rows")
	}
	return nil
}

// allPoints returns the distinct points of the cuts, in order of first
// use, with the base point first.
func (m *Model) allPoints() []*point {
	var out []*point
	seen := make(map[*point]bool)
	if m.base != nil {
		out = append(out, m.base)
		seen[m.base] = true
	}
	for _, c := range m.cuts {
		if !seen[c.pt] {
			seen[c.pt] = true
			out = append(out, c.pt)
		}
	}
	return out
}

// assignParts extends bpart to every block.
func (m *Model) assignParts() {
	if m.label == nil {
		m.label = make(map[int]int32)
	}
	for b := len(m.bpart); b < len(m.brow); b++ {
		lab := 0
		if m.partOf != nil {
			lab = m.partOf(int(m.bcols[m.bstart[b]]))
		}
		p, ok := m.label[lab]
		if !ok {
			p = int32(len(m.label))
			m.label[lab] = p
		}
		m.bpart = append(m.bpart, p)
		if int(p) == len(m.pblock) {
			m.pblock = append(m.pblock, nil)
		}
		m.pblock[p] = append(m.pblock[p], int32(b))
	}
	m.nparts = max(1, len(m.label))
}

// merge adds the rows waiting in pstart, pidx and pval to the
// column-major entries, and extends cstart to every column. The rows come
// after every merged row, so each column's new entries go at its end.
func (m *Model) merge() {
	if len(m.pstart) <= 1 && len(m.cstart) == m.ncols+1 {
		return
	}
	old := max(0, len(m.cstart)-1) // columns merged before
	cstart := make([]int, m.ncols+1)
	for j := range old {
		cstart[j+1] = m.cstart[j+1] - m.cstart[j]
	}
	for _, j := range m.pidx {
		cstart[j+1]++
	}
	for j := range m.ncols {
		cstart[j+1] += cstart[j]
	}
	crow := make([]int32, cstart[m.ncols])
	cval := make([]float64, cstart[m.ncols])
	next := make([]int, m.ncols)
	for j := range m.ncols {
		next[j] = cstart[j]
		if j < old {
			next[j] += copy(crow[cstart[j]:], m.crow[m.cstart[j]:m.cstart[j+1]])
			copy(cval[cstart[j]:], m.cval[m.cstart[j]:m.cstart[j+1]])
		}
	}
	waiting := max(0, len(m.pstart)-1)
	first := m.nlink() - waiting // row of the first waiting row
	if len(m.rstart) == 0 {
		m.rstart = append(m.rstart, 0)
	}
	for k := range waiting {
		at := len(m.rcol)
		for e := m.pstart[k]; e < m.pstart[k+1]; e++ {
			j := m.pidx[e]
			crow[next[j]] = int32(first + k)
			cval[next[j]] = m.pval[e]
			next[j]++
			m.rcol = append(m.rcol, j)
			m.rval = append(m.rval, m.pval[e])
		}
		if !slices.IsSorted(m.rcol[at:]) {
			sort.Sort(byColumn{m.rcol[at:], m.rval[at:]})
		}
		m.rstart = append(m.rstart, len(m.rcol))
	}
	m.cstart, m.crow, m.cval = cstart, crow, cval
	m.pstart, m.pidx, m.pval = nil, nil, nil
}

// byColumn sorts a row's entries by column.
type byColumn struct {
	col []int32
	val []float64
}

func (r byColumn) Len() int           { return len(r.col) }
func (r byColumn) Less(a, b int) bool { return r.col[a] < r.col[b] }
func (r byColumn) Swap(a, b int) {
	r.col[a], r.col[b] = r.col[b], r.col[a]
	r.val[a], r.val[b] = r.val[b], r.val[a]
}

// rowValues returns, per part, a_v·x over the part's blocks of pure point
// pt, for the linking rows from..nlink-1. It reads only the chosen
// columns' entries.
func (m *Model) rowValues(pt *point, from int) [][]float64 {
	m.merge()
	k := m.nlink()
	out := make([][]float64, m.nparts)
	for p := range out {
		out[p] = make([]float64, k-from)
	}
	// Each part's sums run over its blocks in order, whichever goroutine
	// computes them.
	parallelChunks(m.nparts, 1, func(plo, phi int) {
		for p := plo; p < phi; p++ {
			if p >= len(m.pblock) {
				continue // a program without blocks
			}
			r := out[p]
			for _, b := range m.pblock[p] {
				j := m.bcols[m.bstart[b]+int(pt.pick[b])]
				xj := 1 / m.mult[j]
				lo, hi := m.cstart[j], m.cstart[j+1]
				if from > 0 {
					// The rows from on are the column's last
					// entries, and few.
					for lo = hi; lo > m.cstart[j] && int(m.crow[lo-1]) >= from; lo-- {
					}
				}
				rows, val := m.crow[lo:hi], m.cval[lo:hi]
				val = val[:len(rows)]
				for e, v := range rows {
					r[int(v)-from] += val[e] * xj
				}
			}
		}
	})
	return out
}

// parallelChunks calls f on the chunks [lo, hi) of [0, n), at most chunk
// long, from as many goroutines as there are processors. Callers write
// only to their chunk's own places, so the result does not depend on how
// the chunks were shared out.
func parallelChunks(n, chunk int, f func(lo, hi int)) {
	workers := min(runtime.GOMAXPROCS(0), (n+chunk-1)/chunk)
	if workers <= 1 {
		f(0, n)
		return
	}
	var next atomic.Int64
	var wg sync.WaitGroup
	for range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				lo := int(next.Add(int64(chunk))) - chunk
				if lo >= n {
					return
				}
				f(lo, min(n, lo+chunk))
			}
		}()
	}
	wg.Wait()
}

// newCuts returns the cuts of point pt in every part.
func (m *Model) newCuts(pt *point, sticky bool) []*cut {
	rv := m.rowValues(pt, 0)
	k := m.pointCosts(pt)
	out := make([]*cut, m.nparts)
	for p := range out {
		out[p] = &cut{pt: pt, part: int32(p), r: rv[p], sticky: sticky, k: k[p]}
	}
	return out
}

// price returns the pure point that minimises Σ_v π_v R(v) and that
// minimum, a lower bound on the program's optimum when π is a prior.
func (m *Model) price(pi []float64) (*point, float64) {
	if len(m.cost) < m.ncols {
		m.cost = make([]float64, m.ncols)
	}
	c := m.cost[:m.ncols]
	val := 0.0
	w := make([]float64, len(pi))
	for v, x := range pi {
		if x > 0 {
			val -= x * m.lb[v]
			w[v] = x
		}
	}
	m.columnCosts(w, c)
	for j, x := range m.costs {
		c[j] += x
	}
	// Of the columns that minimise a block's cost, pick the preferred
	// one, or the one best on average over all linking rows: blocks that
	// no row of the prior reaches then choose sensibly, not arbitrarily.
	if m.prefer == nil && len(m.avg) < m.ncols {
		m.average()
	}
	m.scores()
	pt := &point{pick: make([]uint8, len(m.brow))}
	for b := range m.brow {
		cols := m.bcols[m.bstart[b]:m.bstart[b+1]]
		best := math.Inf(1)
		for _, j := range cols {
			best = math.Min(best, c[j]/m.mult[j])
		}
		val += best
		tie := best + 1e-12*math.Abs(best)
		at, second := 0, math.Inf(1)
		for k, j := range cols {
			if c[j]/m.mult[j] > tie {
				continue
			}
			var sec float64
			if m.prefer != nil {
				sec = m.pref[j]
			} else {
				sec = m.avg[j] / m.mult[j]
			}
			if sec < second {
				at, second = k, sec
			}
		}
		pt.pick[b] = uint8(at)
	}
	return pt, val
}

// preferredPoint returns the point of the least-score column of every
// block.
func (m *Model) preferredPoint() *point {
	m.scores()
	pt := &point{pick: make([]uint8, len(m.brow))}
	for b := range m.brow {
		at, best := 0, math.Inf(1)
		for k, j := range m.bcols[m.bstart[b]:m.bstart[b+1]] {
			if m.pref[j] < best {
				at, best = k, m.pref[j]
			}
		}
		pt.pick[b] = uint8(at)
	}
	return pt
}

// scores extends pref to every column.
func (m *Model) scores() {
	for j := len(m.pref); m.prefer != nil && j < m.ncols; j++ {
		sc := 0.0
		if j > 0 {
			sc = m.prefer(j)
		}
		m.pref = append(m.pref, sc)
	}
}

// average sets avg to the columns' costs under the uniform prior on the
// linking rows.
func (m *Model) average() {
	w := make([]float64, m.nlink())
	for v := range w {
		w[v] = 1 / float64(len(w))
	}
	m.avg = make([]float64, m.ncols)
	m.columnCosts(w, m.avg)
}

// columnCosts sets c[j] to Σ_v w[v] a_vj for every column j (w >= 0),
// each column's entries summed in row order, as one pass over the rows
// would: the same sums however the columns are shared out between the
// processors. (Rows of weight 0 add zeros.)
//
// A prior whose rows hold less than two thirds of the entries is read row
// by row: only the weighed rows' entries, added to each column in row
// order as well, so the sums are the same bits. (The master's priors weigh
// a tenth of the rows or less, but the longest: four channels with
// 15-point pmfs, 7% of the rows with 37% of the entries.)
func (m *Model) columnCosts(w, c []float64) {
	m.merge()
	weighed := 0
	var support []int
	for v, x := range w {
		if x != 0 {
			support = append(support, v)
			weighed += m.rstart[v+1] - m.rstart[v]
		}
	}
	if 3*weighed < 2*len(m.rcol) {
		m.costsByRow(w, support, c)
		return
	}
	m.costsByColumn(w, c)
}

// costsByColumn is columnCosts reading every entry, column by column.
func (m *Model) costsByColumn(w, c []float64) {
	parallelChunks(m.ncols, 4096, func(lo, hi int) {
		for j := lo; j < hi; j++ {
			rows, val := m.crow[m.cstart[j]:m.cstart[j+1]], m.cval[m.cstart[j]:m.cstart[j+1]]
			val = val[:len(rows)]
			var s float64
			for e, v := range rows {
				s += w[v] * val[e]
			}
			c[j] = s
		}
	})
}

// costsByRow is columnCosts reading only the rows of support (the rows
// of nonzero weight, in increasing order), row by row.
func (m *Model) costsByRow(w []float64, support []int, c []float64) {
	parallelChunks(m.ncols, 4096, func(lo, hi int) {
		clear(c[lo:hi])
		for _, v := range support {
			cols, val := m.rcol[m.rstart[v]:m.rstart[v+1]], m.rval[m.rstart[v]:m.rstart[v+1]]
			e, _ := slices.BinarySearch(cols, int32(lo))
			wv := w[v]
			for ; e < len(cols) && int(cols[e]) < hi; e++ {
				c[cols[e]] += wv * val[e]
			}
		}
	})
}

// Master columns: σ, then η_p per part, then π_v per linking row. Rows:
// Σ π = 1; σ - Σ η_p + Σ b_v π_v <= 0; then one row per cut.
func (m *Model) piCol(v int) int { return 1 + m.nparts + v }

// rebuild loads a new master with the kept cuts, extended to the new
// rows, and the base point's cuts in parts that have none.
func (m *Model) rebuild() error {
	if m.master != nil {
		m.master.Close()
		m.master = nil
	}
	k := m.nlink()
	// Extend the kept cuts' row values, one pass per point.
	byPoint := make(map[*point][]*cut)
	var order []*point
	for _, c := range m.cuts {
		if len(c.r) < k {
			if byPoint[c.pt] == nil {
				order = append(order, c.pt)
			}
			byPoint[c.pt] = append(byPoint[c.pt], c)
		}
	}
	for _, pt := range order {
		from := k
		for _, c := range byPoint[pt] {
			from = min(from, len(c.r))
		}
		rv := m.rowValues(pt, from)
		for _, c := range byPoint[pt] {
			c.r = append(c.r, rv[c.part][len(c.r)-from:]...)
		}
	}
	// The cuts' costs: the costs may have changed, and points found
	// before a block existed choose its first column.
	kOf := make(map[*point][]float64)
	for _, c := range m.cuts {
		k, ok := kOf[c.pt]
		if !ok {
			k = m.pointCosts(c.pt)
			kOf[c.pt] = k
		}
		c.k = k[c.part]
	}
	// Every part needs a cut: the base point's.
	has := make([]bool, m.nparts)
	for _, c := range m.cuts {
		has[c.part] = true
	}
	var rv [][]float64
	for p := range has {
		if !has[p] {
			if rv == nil {
				rv = m.rowValues(m.base, 0)
			}
			if kOf[m.base] == nil {
				kOf[m.base] = m.pointCosts(m.base)
			}
			m.cuts = append(m.cuts, &cut{pt: m.base, part: int32(p), r: rv[p], sticky: true, k: kOf[m.base][p]})
		}
	}

	q := &lp.Problem{}
	q.AddCol(-1, math.Inf(-1), math.Inf(1)) // σ
	for range m.nparts {
		q.AddCol(0, math.Inf(-1), math.Inf(1)) // η_p
	}
	idx := make([]int, 0, k+m.nparts+1)
	val := make([]float64, 0, k+m.nparts+1)
	for v := range k {
		q.AddCol(0, 0, math.Inf(1))
		idx = append(idx, m.piCol(v))
		val = append(val, 1)
	}
	q.AddRow(idx, val, 1, 1)
	idx, val = idx[:0], val[:0]
	idx = append(idx, 0)
	val = append(val, 1)
	for p := range m.nparts {
		idx = append(idx, 1+p)
		val = append(val, -1)
	}
	for v := range k {
		if m.lb[v] != 0 {
			idx = append(idx, m.piCol(v))
			val = append(val, m.lb[v])
		}
	}
	q.AddRow(idx, val, math.Inf(-1), 0)
	for _, c := range m.cuts {
		m.addCut(q, c)
	}
	mm, err := clp.NewModel(q)
	if err != nil {
		return fmt.Errorf("dw: master: %w", err)
	}
	m.rebuilds++
	mm.Resolve = clp.Dual
	mm.PrimalTolerance, mm.DualTolerance = 1e-10, 1e-10
	m.master, m.stale = mm, false
	return nil
}

// addCut appends the row η_p - Σ_v r_v π_v <= 0 of c to q.
func (m *Model) addCut(q interface {
	AddRow([]int, []float64, float64, float64) int
}, c *cut) {
	idx := make([]int, 0, len(c.r)+1)
	val := make([]float64, 0, len(c.r)+1)
	idx = append(idx, 1+int(c.part))
	val = append(val, 1)
	for v, r := range c.r {
		if r != 0 {
			idx = append(idx, m.piCol(v))
			val = append(val, -r)
		}
	}
	q.AddRow(idx, val, math.Inf(-1), c.k)
}

// cutRows adapts clp.Rows to addCut.
type cutRows struct{ clp.Rows }

func (r *cutRows) AddRow(idx []int, val []float64, lo, up float64) int {
	r.Add(idx, val, lo, up)
	return r.Len() - 1
}

// Solve solves the program from where the last solve ended. The solution's
// X holds t (the master's optimum) and the mixture of pure points; its
// RowDual holds minus the best prior found on the linking rows (the duals
// a simplex code would give there, up to the tolerance) and 0 on the block
// rows. Objective is the master's optimum: an upper bound on the program's
// optimum, within the tolerance of it. When ctx ends the solve, Solve
// returns the error together with a solution that holds the best prior so
// far and its lower bound, and no columns (see interrupted).
func (m *Model) Solve(ctx context.Context) (*lp.Solution, error) {
	if err := m.check(); err != nil {
		return nil, err
	}
	tol := m.Tol
	if tol == 0 {
		tol = 1e-11
	}
	alpha := m.Smoothing
	adaptive := alpha == 0
	switch {
	case adaptive:
		alpha = 0.5
	case alpha < 0:
		alpha = 0
	}
	maxIt := m.MaxIterations
	if maxIt == 0 {
		maxIt = 100000
	}
	k := m.nlink()
	if m.newCosts {
		// The lower bound was for other costs: start again from the
		// prior that gave it.
		m.bestLB = math.Inf(-1)
		m.stale = true
	}
	if m.stale {
		// The best lower bound so far still holds: its prior puts no
		// weight on the new linking rows, and the old rows do not reach
		// the new blocks.
		m.center = append(m.center, make([]float64, k-len(m.center))...)
		m.assignParts()
		if m.base == nil {
			uniform := make([]float64, k)
			for v := range uniform {
				uniform[v] = 1 / float64(k)
			}
			pt, lb := m.price(uniform)
			m.bestLB = lb
			copy(m.center, uniform)
			if m.prefer != nil {
				// The preferred columns' point stays in the master:
				// where the prior's rules are erratic away from the
				// linking rows, the mixture can lean on it.
				m.base = m.preferredPoint()
				m.cuts = append(m.cuts, m.newCuts(pt, false)...)
			} else {
				m.base = pt
			}
		} else if m.prefer != nil && m.baseBlocks < len(m.brow) {
			// New blocks: the base point takes their preferred columns.
			// (A rebuild after prune alone leaves it as it is.)
			m.base.pick = m.preferredPoint().pick
			for _, c := range m.cuts {
				if c.pt == m.base {
					c.r = nil // recomputed in rebuild
				}
			}
		}
		if m.newCosts && math.IsInf(m.bestLB, -1) {
			pt, lb := m.price(m.center)
			m.bestLB = lb
			m.cuts = append(m.cuts, m.newCuts(pt, false)...)
		}
		m.newCosts = false
		m.baseBlocks = len(m.brow)
		if err := m.rebuild(); err != nil {
			return nil, err
		}
	}
	var sigma float64
	var pi, dual []float64
	// idle counts the master solves in a row that took no simplex
	// iteration and left its optimum where it was, though the last
	// pricing added cuts: the cuts' violations at the master's prior are
	// within CLP's tolerances, and the solve can get no closer.
	idle, last := 0, math.NaN()
	for it := 0; ; it++ {
		if err := ctx.Err(); err != nil {
			return m.interrupted(fmt.Errorf("dw: %w", err))
		}
		sol, err := m.master.Solve(ctx)
		if err != nil {
			return m.masterFailed(ctx, err)
		}
		m.iters += sol.Iterations
		sigma = -sol.Objective
		// The master's optimum is at least the best lower bound (its
		// value at that prior is). A solve that ends below it has
		// stopped short: CLP's primal simplex on a rebuilt master was
		// seen to call such points optimal, up to 2.5e-3 below, and
		// constraint generation then took a round's rule from a wrong
		// optimum (three channels of normal noise: 5 of 21 rounds).
		// The dual simplex from the basis reached gets through.
		for try := 0; try < 3 && m.bestLB-sigma > 1e-9*math.Max(1, math.Abs(sigma)); try++ {
			if sol, err = m.master.Solve(ctx); err != nil {
				return m.masterFailed(ctx, err)
			}
			m.iters += sol.Iterations
			sigma = -sol.Objective
		}
		// The master's prior, within the simplex tolerance of one: clip
		// and normalise it, so that its pricing value is a lower bound.
		pi = sol.X[m.piCol(0) : m.piCol(0)+k]
		var mass float64
		for v, w := range pi {
			pi[v] = math.Max(w, 0)
			mass += pi[v]
		}
		for v := range pi {
			pi[v] /= mass
		}
		dual = sol.RowDual[2:]
		if sol.Iterations == 0 && sigma == last {
			idle++
		} else {
			idle = 0
		}
		last = sigma
		if sigma-m.bestLB <= tol*math.Max(1, math.Abs(sigma)) {
			break
		}
		if idle >= stallRounds && sigma-m.bestLB <= stallTol*math.Max(1, math.Abs(sigma)) {
			// A tolerance finer than the master resolves: stop at
			// what it does resolve.
			break
		}
		if it >= maxIt {
			return nil, fmt.Errorf("dw: no convergence in %d pricing rounds (master %g, lower bound %g)", maxIt, sigma, m.bestLB)
		}
		maxCuts := m.MaxCuts
		if maxCuts <= 0 {
			maxCuts = 128 * m.nparts
		}
		if len(m.cuts) > maxCuts {
			// A solve that needs many pricing rounds grows the master
			// by a dense row each, and its re-solves slow down
			// (three channels of normal noise: a master of 3,304 cuts
			// took minutes per round): drop the cuts its solution
			// does not use, as between solves, and rebuild it.
			m.prune(dual, maxCuts/4)
			if m.stale {
				if err := m.rebuild(); err != nil {
					return nil, err
				}
			}
		}
		// Price at the smoothed prior; when its point does not cut off
		// the master's prior (a mispricing), price at that prior too.
		sep := pi
		smoothed := !math.IsInf(m.bestLB, -1) && alpha > 0
		if smoothed {
			sep = make([]float64, k)
			for v := range sep {
				sep[v] = alpha*m.center[v] + (1-alpha)*pi[v]
			}
		}
		cr := &cutRows{}
		for {
			pt, lb := m.price(sep)
			if lb > m.bestLB {
				m.bestLB = lb
				copy(m.center, sep)
			}
			cs := m.newCuts(pt, false)
			at := 0.0
			for v, w := range pi {
				at -= w * m.lb[v]
			}
			for _, c := range cs {
				m.cuts = append(m.cuts, c)
				m.addCut(cr, c)
				at += c.k
				for v, w := range pi {
					at += w * c.r[v]
				}
			}
			if smoothed && adaptive {
				// The subgradient at the smoothed prior, along the
				// step from the centre to the master's prior: when
				// the dual function still rises there, smooth less;
				// otherwise more.
				var slope float64
				for v := range k {
					g := -m.lb[v]
					for _, c := range cs {
						g += c.r[v]
					}
					slope += g * (pi[v] - m.center[v])
				}
				if slope > 0 {
					alpha = math.Max(0.1, alpha-0.1)
				} else {
					alpha = math.Min(0.99, alpha+(1-alpha)*0.1)
				}
			}
			if at < sigma-tol*math.Max(1, math.Abs(sigma)) || !smoothed {
				break
			}
			sep, smoothed = pi, false
		}
		if err := m.master.AddRows(&cr.Rows); err != nil {
			return nil, fmt.Errorf("dw: master: %w", err)
		}
	}
	// The mixture: in each part, weight λ_c = -dual on cut c's point.
	x := make([]float64, m.ncols)
	mass := make([]float64, m.nparts)
	for ci, c := range m.cuts {
		if w := -dual[ci]; w > 0 {
			mass[c.part] += w
		}
	}
	for ci, c := range m.cuts {
		w := -dual[ci]
		if w <= 0 || mass[c.part] <= 0 {
			continue
		}
		w /= mass[c.part]
		for b, at := range c.pt.pick {
			if m.bpart[b] != c.part {
				continue
			}
			col := m.bcols[m.bstart[b]+int(at)]
			x[col] += w / m.mult[col]
		}
	}
	// t is the optimum less the mixture's cost.
	x[0] = sigma
	for j, c := range m.costs {
		x[0] -= c * x[j]
	}
	m.prune(dual, 16*m.nparts)
	return &lp.Solution{Objective: sigma, X: x, RowDual: m.centerDual(), Iterations: m.iters}, nil
}

// centerDual returns the row duals of the prior of the best lower bound:
// minus its weight on each linking row, zero on the block rows.
func (m *Model) centerDual() []float64 {
	out := make([]float64, m.nrows)
	for v, row := range m.lrow {
		if v < len(m.center) {
			out[row] = -m.center[v]
		}
	}
	return out
}

// masterFailed is what a solve whose master solve failed with err
// returns: the error, with the best prior so far when ctx has ended (see
// interrupted).
func (m *Model) masterFailed(ctx context.Context, err error) (*lp.Solution, error) {
	err = fmt.Errorf("dw: master (%d cuts): %w", len(m.cuts), err)
	if ctx.Err() != nil {
		return m.interrupted(err)
	}
	return nil, err
}

// interrupted is what a solve that its context ended returns: err, with a
// solution that holds the prior of the best lower bound so far (RowDual,
// as Solve's) and that bound (Objective; -Inf before any pricing), and no
// columns (X nil). A caller stopped by a time limit can still certify the
// bound that the prior gives.
func (m *Model) interrupted(err error) (*lp.Solution, error) {
	return &lp.Solution{Objective: m.bestLB, RowDual: m.centerDual(), Iterations: m.iters}, err
}

// prune drops the cuts the master's last solution does not use, except
// the newest few and the sticky ones, so that the next rebuild stays
// small. The current master keeps its rows, so it is marked stale.
func (m *Model) prune(dual []float64, keepNewest int) {
	if len(m.cuts) <= 4*keepNewest {
		return
	}
	kept := m.cuts[:0]
	for j, c := range m.cuts {
		if dual[j] < 0 || c.sticky || j >= len(m.cuts)-keepNewest {
			kept = append(kept, c)
		}
	}
	clear(m.cuts[len(kept):])
	m.cuts = slices.Clip(kept)
	m.stale = true
}

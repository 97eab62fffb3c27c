// Package minimax builds the finite linear program whose optimum is the
// minimax regret of a lattice model over rules that use the readings of the
// top group (design notes, step 5), and turns a solution back into decision
// tables and a prior.
//
// Variables are t (the worst-case regret, in steps) and x[A, cell, i], the
// probability that the table of group A picks channel i in a cell. Rows are
// one regret row per configuration,
//
//	sum over outcomes a of P(a) * sum_i x[group(v+a), cell(v+a), i] * (max v - v_i) - t <= -c(v),
//
// where c(v) collects the outcomes whose choice is forced, and one row
// sum_i x[A, cell, i] = 1 per cell.
//
// Build writes every configuration's row at once (the direct LP). SolveCG
// generates rows only for the configurations that bind (constraint
// generation), checking all the others with the fast evaluator.
package minimax

import (
	"fmt"
	"maps"
	"math"
	"slices"

	"github.com/pickwise/pickwise/lp"
	"github.com/pickwise/pickwise/tables"
)

// Var identifies the LP column of one table cell entry.
type Var struct {
	Group   tables.Set
	Cell    int32 // index in the group's table
	Channel int8  // position of the channel among the group's members
	// Mult is the number of members of the cell whose probability the
	// column is: 1, or more for members that the symmetry of identical
	// channels makes interchangeable in this cell.
	Mult int8
}

// Formulation is the linear program of a model with the bookkeeping needed
// to read a solution back.
type Formulation struct {
	Layout  *tables.Layout
	Problem *lp.Problem
	// Vars describes column j+1 (column 0 is t).
	Vars []Var
	// Configs holds the configuration of each regret row, n values per
	// row (Far for channels outside the subset), row-major; RowOf[k] is
	// the LP row of configuration k.
	Configs []int
	RowOf   []int
	// Tables is the table rule whose cells the columns refer to; its
	// probabilities are uniform until Apply is called.
	Tables *tables.Optimal

	// cols holds, per group, the column of each member in each cell
	// (-1 where the member is not alive), |members| entries per cell.
	// Cells in one orbit of the symmetry share columns.
	cols  map[tables.Set][]int32
	sym   *symmetry
	diffs map[tables.Set]*tables.Differences
	// scratch of the goroutines that compute rows (addRegretRows)
	scratch []*rowScratch
}

// Options bound the size of a formulation.
type Options struct {
	// MaxNonzeros refuses a model whose LP is estimated to hold more
	// nonzeros (0: the default, 4e8).
	MaxNonzeros float64
	// NoSymmetry gives every configuration its row and every cell its
	// columns even when channels with identical noise make them
	// interchangeable (see the package doc).
	NoSymmetry bool
}

// SizeError reports a model whose LP is too large to build.
type SizeError struct {
	Rows, Nonzeros float64
	Bytes          float64
}

func (e *SizeError) Error() string {
	return fmt.Sprintf("the exact LP would have about %.3g rows and %.3g nonzeros (about %.1f GiB to build and solve); "+
		"use a coarser step, a larger tail, or fewer channels", e.Rows, e.Nonzeros, e.Bytes/(1<<30))
}

// Estimate returns estimates of the number of regret rows and nonzeros of
// the direct LP of layout l, without building it.
func Estimate(l *tables.Layout) (rows, nonzeros float64) {
	n := l.N()
	for _, q := range tables.Subsets(n) {
		m := q.Len()
		// Sorted profiles times distinct assignments, ignoring ties.
		c := math.Pow(float64(l.D+1), float64(m-1)) * factorial(m)
		out := 1.0
		for _, i := range q.Members() {
			out *= float64(l.Hi[i] - l.Lo[i] + 1)
		}
		// Outcomes collapse onto at most prod over all but one channel of
		// the reachable reading differences.
		cells := 1.0
		mem := q.Members()
		for _, i := range mem[1:] {
			cells *= float64(l.Hi[i] - l.Lo[i] + l.Hi[mem[0]] - l.Lo[mem[0]] + 1)
		}
		rows += c
		nonzeros += c * math.Min(out, cells) * float64(m-1)
	}
	return rows, nonzeros
}

func factorial(m int) float64 {
	f := 1.0
	for i := 2; i <= m; i++ {
		f *= float64(i)
	}
	return f
}

// newFormulation returns a formulation with column t and no cells; it uses
// the symmetry of identical channels unless noSym is set.
func newFormulation(l *tables.Layout, noSym bool) *Formulation {
	f := &Formulation{Layout: l, Problem: &lp.Problem{}, Tables: tables.NewOptimal(l),
		cols: make(map[tables.Set][]int32), diffs: make(map[tables.Set]*tables.Differences)}
	if !noSym {
		f.sym = newSymmetry(l)
	}
	f.Problem.AddCol(1, 0, math.Inf(1)) // t
	return f
}

// Symmetric reports whether the formulation keeps one row per orbit of
// configurations and shares columns within orbits of cells, because some
// channels have identical noise.
func (f *Formulation) Symmetric() bool { return f.sym != nil }

// addCell adds the cell of readings r to group g's table with one column
// per alive channel, and returns its index. When share is not nil, member
// k uses the column of member share[k] <= k instead (share[k] == k: its
// own column).
func (f *Formulation) addCell(g, alive tables.Set, r []int, share []int) int {
	t := f.Tables.Table(g)
	ci := t.Add(r, alive, nil)
	p := f.Problem
	first := len(f.cols[g])
	for k, ch := range t.Members {
		col := int32(-1)
		switch {
		case !alive.Has(ch):
		case share != nil && share[k] != k:
			col = f.cols[g][first+share[k]]
			f.Vars[col-1].Mult++
		default:
			col = int32(p.NumCols())
			p.AddCol(0, 0, math.Inf(1))
			f.Vars = append(f.Vars, Var{Group: g, Cell: int32(ci), Channel: int8(k), Mult: 1})
		}
		f.cols[g] = append(f.cols[g], col)
	}
	return ci
}

// addOrbit adds the cell of readings r in group g's table, with alive set
// alive, and returns its index. With a symmetry it adds every cell of the
// orbit: the canonical one gets the columns and the others share them,
// member for member under the permutation.
func (f *Formulation) addOrbit(g, alive tables.Set, r []int) int {
	if f.sym == nil {
		return f.addCell(g, alive, r, nil)
	}
	n := len(r)
	s := f.sym.canonCell(f.Tables, g, r)
	cg := mapSet(s, g)
	cr := make([]int, n)
	apply(s, r, cr)
	ct := f.Tables.Table(cg)
	pos := make([]int, n) // position of each channel among cg's members
	for k, ch := range ct.Members {
		pos[ch] = k
	}
	// The permutations that fix the canonical cell (its stabiliser) must
	// fix the rule there too: members that one of them swaps share a
	// column. Without this the rows of non-canonical configurations,
	// which the LP leaves out, would not equal their canonical rows.
	m := len(ct.Members)
	share := make([]int, m)
	for k := range share {
		share[k] = k
	}
	key, _ := ct.Key(cr)
	img := make([]int, n)
	for _, p := range f.sym.perms[1:] {
		if mapSet(p, cg) != cg {
			continue
		}
		apply(p, cr, img)
		if k, _ := ct.Key(img); k != key {
			continue
		}
		for k, ch := range ct.Members {
			a, b := share[k], share[pos[p[ch]]]
			lo := min(a, b)
			// Merge the classes of a and b under their least member.
			for j := range share {
				if share[j] == a || share[j] == b {
					share[j] = lo
				}
			}
		}
	}
	ci := f.addCell(cg, mapSet(s, alive), cr, share)
	ccols := f.cols[cg][ci*m : (ci+1)*m]
	for _, p := range f.sym.perms[1:] {
		pg := mapSet(p, cg)
		t := f.Tables.Table(pg)
		apply(p, cr, img)
		if t.Lookup(img) >= 0 {
			continue
		}
		calive := f.Tables.Table(cg).Cells[ci].Alive
		t.Add(img, mapSet(p, calive), nil)
		for _, ch := range t.Members {
			// The channel that p maps to ch.
			src := slices.Index(p, ch)
			f.cols[pg] = append(f.cols[pg], ccols[pos[src]])
		}
	}
	return f.Tables.Table(g).Lookup(r)
}

// differences returns the noise difference pmf of subset q, built on
// first use.
func (f *Formulation) differences(q tables.Set) *tables.Differences {
	d := f.diffs[q]
	if d == nil {
		d = f.Layout.Differences(q)
		f.diffs[q] = d
	}
	return d
}

// Build returns the direct LP of layout l: a regret row for every
// configuration.
func Build(l *tables.Layout, opt Options) (*Formulation, error) {
	rows, nz := Estimate(l)
	limit := opt.MaxNonzeros
	if limit == 0 {
		limit = 4e8
	}
	if nz > limit {
		return nil, &SizeError{Rows: rows, Nonzeros: nz, Bytes: nz * 40}
	}
	n := l.N()
	f := newFormulation(l, opt.NoSymmetry)
	w := make([]int, n)
	// Rows are added in batches, computed in parallel.
	const batch = 1024
	var vs [][]int
	for _, q := range tables.Subsets(n) {
		tables.Configurations(n, q, l.D, func(v []int) bool {
			if f.sym != nil {
				// One row per orbit: the canonical configuration's.
				if f.sym.canonConfig(v, w); !slices.Equal(v, w) {
					return true
				}
			}
			vs = append(vs, append([]int(nil), v...))
			if len(vs) == batch {
				f.addRegretRows(vs, nil)
				vs = vs[:0]
			}
			return true
		})
	}
	f.addRegretRows(vs, nil)
	f.addCellRows()
	return f, nil
}

// addCellRows appends one row per cell: the probabilities of its alive
// channels sum to 1.
func (f *Formulation) addCellRows() { f.addCellRowsFrom(1, nil) }

// addCellRowsFrom appends the rows of the cells whose columns start at
// column first or later to the problem, and to also when it is not nil.
func (f *Formulation) addCellRowsFrom(first int, also *lp.Problem) {
	p := f.Problem
	var idx []int
	var val []float64
	for j := first; j < p.NumCols(); {
		k := j
		idx, val = idx[:0], val[:0]
		for k < p.NumCols() && f.sameCell(k, j) {
			idx = append(idx, k)
			val = append(val, float64(f.Vars[k-1].Mult))
			k++
		}
		p.AddRow(idx, val, 1, 1)
		if also != nil {
			also.AddRow(idx, val, 1, 1)
		}
		j = k
	}
}

// Apply copies the probabilities of solution x into the formulation's
// tables: negative round-off is clipped to 0 and each cell renormalised.
// Cells that share columns under the symmetry get the same probabilities,
// permuted. A cell none of whose columns is in x picks as a missing cell
// does (tables.Fallback with the tables' offsets).
func (f *Formulation) Apply(x []float64) {
	r := make([]int, f.Layout.N())
	for i := range r {
		r[i] = tables.Far
	}
	for _, t := range f.Tables.Tables {
		m := len(t.Members)
		cols := f.cols[t.Group]
		for ci := range t.Cells {
			cell := &t.Cells[ci]
			var s float64
			for k := range m {
				pv := 0.0
				if c := cols[ci*m+k]; c >= 0 && int(c) < len(x) {
					pv = math.Max(x[c], 0)
				}
				cell.P[k] = pv
				s += pv
			}
			if s > 0 {
				for k := range cell.P {
					cell.P[k] /= s
				}
				continue
			}
			// No probabilities in x (a cell added after x was found):
			// pick as a table without the cell would.
			fallback(t, cell, f.Tables.Half, r, cell.P)
		}
	}
}

// fallback sets p to the probabilities with which table t would pick
// at cell if the table did not have it, half being the offsets of missing
// cells (tables.Optimal.Half). r is scratch space of length n, all
// tables.Far, and is left so.
func fallback(t *tables.Table, cell *tables.Cell, half []int, r []int, p []float64) {
	for k, ch := range t.Members {
		r[ch] = cell.Diff[k]
	}
	tied := tables.Fallback(cell.Alive, r, half)
	w := 1 / float64(tied.Len())
	for k, ch := range t.Members {
		r[ch] = tables.Far
		p[k] = 0
		if tied.Has(ch) {
			p[k] = w
		}
	}
}

// snapshot returns a copy of the probabilities of every cell of f's
// tables: per table, the cells' P one after the other.
func (f *Formulation) snapshot() [][]float64 {
	out := make([][]float64, len(f.Tables.Tables))
	for i, t := range f.Tables.Tables {
		s := make([]float64, 0, len(t.Cells)*len(t.Members))
		for ci := range t.Cells {
			s = append(s, t.Cells[ci].P...)
		}
		out[i] = s
	}
	return out
}

// eachSnapped calls fn for every cell of f's tables (table t, cell index
// ci) with the cell's probabilities in snap, a snapshot of the same tables
// taken when they may have had fewer cells: cells added since pick as a
// table without them would, as they did when the snapshot's rule was
// evaluated.
func (f *Formulation) eachSnapped(snap [][]float64, fn func(t *tables.Table, ci int, p []float64)) {
	r := make([]int, f.Layout.N())
	for i := range r {
		r[i] = tables.Far
	}
	var tmp []float64
	for i, t := range f.Tables.Tables {
		m := len(t.Members)
		for ci := range t.Cells {
			if (ci+1)*m <= len(snap[i]) {
				fn(t, ci, snap[i][ci*m:(ci+1)*m])
				continue
			}
			tmp = slices.Grow(tmp[:0], m)[:m]
			fallback(t, &t.Cells[ci], f.Tables.Half, r, tmp)
			fn(t, ci, tmp)
		}
	}
}

// restore sets the probabilities of f's tables to those of snap (see
// eachSnapped).
func (f *Formulation) restore(snap [][]float64) {
	f.eachSnapped(snap, func(t *tables.Table, ci int, p []float64) { copy(t.Cells[ci].P, p) })
}

// mix sets f's tables to the rule that follows their rule with
// probability theta and that of snap (see eachSnapped) otherwise, and
// returns its snapshot. Regrets are linear in the probabilities: the
// mixture's regret at every configuration is theta times the first
// rule's plus 1-theta times the second's.
func (f *Formulation) mix(snap [][]float64, theta float64) [][]float64 {
	f.eachSnapped(snap, func(t *tables.Table, ci int, p []float64) {
		cell := &t.Cells[ci]
		for k := range cell.P {
			cell.P[k] = theta*cell.P[k] + (1-theta)*p[k]
		}
	})
	return f.snapshot()
}

// NumConfigs returns the number of configurations with a regret row.
func (f *Formulation) NumConfigs() int { return len(f.RowOf) }

// Config returns configuration k (n values, Far outside its subset).
func (f *Formulation) Config(k int) []int {
	n := f.Layout.N()
	return f.Configs[k*n : (k+1)*n]
}

// Prior returns the prior over configurations given by the duals of the
// regret rows: the negated duals, clipped at 0 and normalised to sum to 1,
// one weight per configuration. Rows beyond the end of dual (added after
// the solve) get weight 0. It returns nil when the duals are missing or
// all zero.
func (f *Formulation) Prior(dual []float64) []float64 {
	if dual == nil {
		return nil
	}
	w := make([]float64, len(f.RowOf))
	var s float64
	for k, row := range f.RowOf {
		if row < len(dual) {
			w[k] = math.Max(-dual[row], 0)
		}
		s += w[k]
	}
	if s == 0 {
		return nil
	}
	for i := range w {
		w[i] /= s
	}
	return w
}

// PriorValue returns the Bayes risk, in steps, of prior (one weight per
// configuration, as Prior returns) over the cells of f: the least expected
// regret under the prior of any rule, which picks in each cell the choice
// of least expected regret. Every cell that the prior's configurations
// reach has columns, so it is a lower bound on the optimum of the
// working set and of the whole model, computed in floating point (the
// certificate computes it exactly).
func (f *Formulation) PriorValue(prior []float64) float64 {
	p := f.Problem
	cost := make(map[int]float64)
	var v float64
	for k, w := range prior {
		if w == 0 {
			continue
		}
		row := f.RowOf[k]
		v -= w * p.RowUp[row]
		for e := p.RowStart[row]; e < p.RowStart[row+1]; e++ {
			if j := int(p.Index[e]); j > 0 {
				cost[j] += w * p.Value[e]
			}
		}
	}
	// The columns of a cell are consecutive; its least cost per unit of
	// probability is 0 unless the prior reaches all of them. Cells are
	// taken in column order, each once (the sum is the same from run to
	// run).
	end := 0 // the first column past the last cell summed
	for _, j := range slices.Sorted(maps.Keys(cost)) {
		if j < end {
			continue
		}
		first := j
		for first > 1 && f.sameCell(first-1, j) {
			first--
		}
		least := math.Inf(1)
		for end = first; end <= len(f.Vars) && f.sameCell(end, j); end++ {
			least = math.Min(least, cost[end]/float64(f.Vars[end-1].Mult))
		}
		v += least
	}
	return v
}

// sameCell reports whether columns a and b (both past t) belong to the same
// cell. The columns of a cell are consecutive.
func (f *Formulation) sameCell(a, b int) bool {
	return f.Vars[a-1].Group == f.Vars[b-1].Group && f.Vars[a-1].Cell == f.Vars[b-1].Cell
}

// reachedColumns reports, per column, whether a configuration that prior
// (one weight per configuration, as Prior returns) weighs has an entry in
// a column of the column's cell: the cells where the prior's Bayes rules
// are decided. Other cells are free as far as the prior is concerned.
func (f *Formulation) reachedColumns(prior []float64) []bool {
	p := f.Problem
	out := make([]bool, p.NumCols())
	for k, w := range prior {
		if w == 0 {
			continue
		}
		row := f.RowOf[k]
		for e := p.RowStart[row]; e < p.RowStart[row+1]; e++ {
			if j := int(p.Index[e]); j > 0 {
				out[j] = true
			}
		}
	}
	// The columns of a cell are consecutive: spread each mark over its
	// cell.
	for j := 1; j < len(out); {
		end, any := j, false
		for ; end < len(out) && f.sameCell(end, j); end++ {
			any = any || out[end]
		}
		for i := j; i < end; i++ {
			out[i] = any
		}
		j = end
	}
	return out
}

// PriorConfigs returns the prior of Prior spread over all configurations:
// with a symmetry, the weight of each row is shared equally by the
// configurations of its orbit (the prior the rows stand for, which the
// group leaves unchanged). Configurations of zero weight are left out.
func (f *Formulation) PriorConfigs(dual []float64) (configs [][]int, weights []float64) {
	w := f.Prior(dual)
	for k, x := range w {
		if x == 0 {
			continue
		}
		v := f.Config(k)
		if f.sym == nil {
			configs = append(configs, slices.Clone(v))
			weights = append(weights, x)
			continue
		}
		orb := f.sym.orbit(v)
		for _, u := range orb {
			configs = append(configs, u)
			weights = append(weights, x/float64(len(orb)))
		}
	}
	return configs, weights
}

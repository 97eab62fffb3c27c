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
	"math"
	"sort"

	"github.com/pickwise/pickwise/lp"
	"github.com/pickwise/pickwise/tables"
)

// Var identifies the LP column of one table cell entry.
type Var struct {
	Group   tables.Set
	Cell    int32 // index in the group's table
	Channel int8  // position of the channel among the group's members
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

	colOf map[tables.Set][]int32 // first column of each cell, per group
	diffs map[tables.Set]*tables.Differences
	// scratch for rows
	acc     []float64
	touched []int
	r       []int
	order   []int
}

// Options bound the size of a formulation.
type Options struct {
	// MaxNonzeros refuses a model whose LP is estimated to hold more
	// nonzeros (0: the default, 4e8).
	MaxNonzeros float64
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

// newFormulation returns a formulation with column t and no cells.
func newFormulation(l *tables.Layout) *Formulation {
	n := l.N()
	f := &Formulation{Layout: l, Problem: &lp.Problem{}, Tables: tables.NewOptimal(l),
		colOf: make(map[tables.Set][]int32), diffs: make(map[tables.Set]*tables.Differences),
		r: make([]int, n), order: make([]int, n)}
	f.Problem.AddCol(1, 0, math.Inf(1)) // t
	return f
}

// addCell adds the cell of readings r to group g's table with one column
// per alive channel, and returns its index.
func (f *Formulation) addCell(g, alive tables.Set, r []int) int {
	t := f.Tables.Table(g)
	ci := t.Add(r, alive, nil)
	p := f.Problem
	f.colOf[g] = append(f.colOf[g], int32(p.NumCols()))
	for k, ch := range t.Members {
		if alive.Has(ch) {
			p.AddCol(0, 0, math.Inf(1))
			f.Vars = append(f.Vars, Var{Group: g, Cell: int32(ci), Channel: int8(k)})
		}
	}
	for len(f.acc) < p.NumCols() {
		f.acc = append(f.acc, 0)
	}
	return ci
}

// regretRow returns the regret row of configuration v (without the -t
// entry): column indices in increasing order, coefficients, and the
// constant of the forced outcomes. Cells met for the first time are added
// when create is set; otherwise a missing cell is an error.
func (f *Formulation) regretRow(v []int, create bool, idx []int, val []float64) ([]int, []float64, float64, error) {
	l := f.Layout
	n := l.N()
	var q tables.Set
	top := tables.Far
	for i, x := range v {
		if x > tables.Far/2 {
			q |= 1 << uint(i)
			top = max(top, x)
		}
	}
	var forced float64
	var err error
	r := f.r
	diff := f.diffs[q]
	if diff == nil {
		diff = l.Differences(q)
		f.diffs[q] = diff
	}
	for k := 0; k < diff.Len() && err == nil; k++ {
		a, prob := diff.Point(k), diff.Prob[k]
		for i := range r {
			r[i] = v[i] + a[i]
		}
		g := l.TopGroup(r, f.order)
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
			if !create {
				err = fmt.Errorf("minimax: configuration %v reaches a cell of group %v that has no column", v, t.Members)
				continue
			}
			ci = f.addCell(g, alive, r)
		}
		col := int(f.colOf[g][ci])
		for _, ch := range t.Members {
			if !alive.Has(ch) {
				continue
			}
			if d := top - v[ch]; d != 0 {
				if f.acc[col] == 0 {
					f.touched = append(f.touched, col)
				}
				f.acc[col] += prob * float64(d)
			}
			col++
		}
	}
	sort.Ints(f.touched)
	idx, val = idx[:0], val[:0]
	for _, c := range f.touched {
		if f.acc[c] != 0 {
			idx = append(idx, c)
			val = append(val, f.acc[c])
		}
		f.acc[c] = 0
	}
	f.touched = f.touched[:0]
	return idx, val, forced, err
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
	f := newFormulation(l)
	p := f.Problem
	var idx []int
	var val []float64
	var err error
	for _, q := range tables.Subsets(n) {
		tables.Configurations(n, q, l.D, func(v []int) bool {
			var forced float64
			idx, val, forced, err = f.regretRow(v, true, idx, val)
			if err != nil {
				return false
			}
			idx = append(idx, 0)
			val = append(val, -1)
			f.RowOf = append(f.RowOf, p.AddRow(idx, val, math.Inf(-1), -forced))
			f.Configs = append(f.Configs, v...)
			return true
		})
		if err != nil {
			return nil, err
		}
	}
	f.addCellRows()
	return f, nil
}

// addCellRows appends one row per cell: the probabilities of its alive
// channels sum to 1.
func (f *Formulation) addCellRows() {
	p := f.Problem
	var idx []int
	var val []float64
	for j := 1; j < p.NumCols(); {
		v := f.Vars[j-1]
		k := j
		idx, val = idx[:0], val[:0]
		for k < p.NumCols() && f.Vars[k-1].Group == v.Group && f.Vars[k-1].Cell == v.Cell {
			idx = append(idx, k)
			val = append(val, 1)
			k++
		}
		p.AddRow(idx, val, 1, 1)
		j = k
	}
}

// Apply copies the probabilities of solution x into the formulation's
// tables: negative round-off is clipped to 0 and each cell renormalised.
func (f *Formulation) Apply(x []float64) {
	for j := 1; j < len(x) && j <= len(f.Vars); {
		v := f.Vars[j-1]
		t := f.Tables.Table(v.Group)
		cell := &t.Cells[v.Cell]
		k := j
		var s float64
		for k < len(x) && k <= len(f.Vars) && f.Vars[k-1].Group == v.Group && f.Vars[k-1].Cell == v.Cell {
			pv := math.Max(x[k], 0)
			cell.P[f.Vars[k-1].Channel] = pv
			s += pv
			k++
		}
		if s > 0 {
			for i := range cell.P {
				cell.P[i] /= s
			}
		}
		j = k
	}
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
// one weight per configuration. It returns nil when the duals are missing
// or all zero.
func (f *Formulation) Prior(dual []float64) []float64 {
	if dual == nil {
		return nil
	}
	w := make([]float64, len(f.RowOf))
	var s float64
	for k, row := range f.RowOf {
		if row >= len(dual) {
			return nil
		}
		w[k] = math.Max(-dual[row], 0)
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

// Package minimax builds the finite linear program whose optimum is the
// minimax regret of a lattice model (design notes, step 5), and turns a
// solution back into decision tables and a prior.
//
// Variables are t (the worst-case regret, in steps) and x[A, cell, i], the
// probability that the table of group A picks channel i in a cell. Rows are
// one regret row per configuration,
//
//	sum over outcomes a of P(a) * sum_i x[group(v+a), cell(v+a), i] * (max v - v_i) - t <= -c(v),
//
// where c(v) collects the outcomes whose choice is forced, and one row
// sum_i x[A, cell, i] = 1 per cell.
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
	Channel int8
}

// Formulation is the linear program of a model with the bookkeeping needed
// to read a solution back.
type Formulation struct {
	Layout  *tables.Layout
	Problem *lp.Problem
	// Vars describes column j+1 (column 0 is t).
	Vars []Var
	// Configs holds the configuration of each regret row, n values per
	// row (Far for channels outside the subset), row-major.
	Configs []int
	// RegretRows is the number of regret rows; they come first, followed
	// by one row per table cell with at least two alive channels.
	RegretRows int
	// Tables is the table rule whose cells the columns refer to; its
	// probabilities are uniform until Apply is called.
	Tables *tables.Optimal
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
// the LP of layout l, without building it.
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

// Build returns the LP of layout l.
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
	f := &Formulation{Layout: l, Problem: &lp.Problem{}, Tables: tables.NewOptimal(l)}
	p := f.Problem
	p.AddCol(1, 0, math.Inf(1)) // t
	// colOf[group] maps a cell index to its first column; channels of a
	// cell's alive set get consecutive columns in member order.
	colOf := make(map[tables.Set][]int32)
	var (
		acc     []float64 // coefficient per column for the current row
		touched []int
		r       = make([]int, n)
		order   = make([]int, n)
		idx     []int
		val     []float64
	)
	for _, q := range tables.Subsets(n) {
		tables.Configurations(n, q, l.D, func(v []int) bool {
			top := tables.Far
			for _, x := range v {
				if x > top {
					top = x
				}
			}
			var forced float64
			l.Outcomes(q, func(a []int, prob float64) {
				for i := range r {
					r[i] = v[i] + a[i]
				}
				g := l.TopGroup(r, order)
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
					return
				}
				t := f.Tables.Table(g)
				ci := t.Lookup(r)
				if ci < 0 {
					ci = t.Add(r, alive, nil)
					first := int32(p.NumCols())
					colOf[g] = append(colOf[g], first)
					for k, ch := range t.Members {
						if alive.Has(ch) {
							p.AddCol(0, 0, math.Inf(1))
							f.Vars = append(f.Vars, Var{Group: g, Cell: int32(ci), Channel: int8(k)})
						}
					}
					for len(acc) < p.NumCols() {
						acc = append(acc, 0)
					}
				}
				col := int(colOf[g][ci])
				for _, ch := range t.Members {
					if !alive.Has(ch) {
						continue
					}
					if d := top - v[ch]; d != 0 {
						if acc[col] == 0 {
							touched = append(touched, col)
						}
						acc[col] += prob * float64(d)
					}
					col++
				}
			})
			sort.Ints(touched)
			idx, val = idx[:0], val[:0]
			for _, c := range touched {
				if acc[c] != 0 {
					idx = append(idx, c)
					val = append(val, acc[c])
				}
				acc[c] = 0
			}
			touched = touched[:0]
			idx = append(idx, 0)
			val = append(val, -1)
			p.AddRow(idx, val, math.Inf(-1), -forced)
			f.Configs = append(f.Configs, v...)
			return true
		})
	}
	f.RegretRows = p.NumRows()
	// One row per cell: the probabilities of its alive channels sum to 1.
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
	return f, nil
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

// Config returns the configuration of regret row i (n values, Far outside
// its subset).
func (f *Formulation) Config(i int) []int {
	n := f.Layout.N()
	return f.Configs[i*n : (i+1)*n]
}

// Prior returns the prior over configurations given by the duals of the
// regret rows: the negated duals, clipped at 0 and normalised to sum to 1.
// It returns nil when the duals are missing or all zero.
func (f *Formulation) Prior(dual []float64) []float64 {
	if len(dual) < f.RegretRows {
		return nil
	}
	w := make([]float64, f.RegretRows)
	var s float64
	for i := range w {
		w[i] = math.Max(-dual[i], 0)
		s += w[i]
	}
	if s == 0 {
		return nil
	}
	for i := range w {
		w[i] /= s
	}
	return w
}

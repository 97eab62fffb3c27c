package dw

import (
	"math"
	"slices"
)

// Row values of pure points are computed incrementally. The points that a
// solve prices one after the other usually differ in few blocks, so the
// values of a new point are those of a reference point (the last point
// whose values were computed from row 0), corrected, for every block
// whose choice differs, by the entries of the old and the new column.
// The linking entries are kept by column too for that (see linkCols).
//
// An update adds the same products a_vj·x_j as the full product, in
// another order, so the values differ from the full product's by
// round-off that grows with the chain of updates since the last full
// product. The chain is bounded: after maxChain updates the next point's
// values are computed in full again, which keeps the difference within a
// few hundred units of round-off of the rows' sums of |a_vj·x_j|. A value
// whose row has no nonzero term in the part is exactly zero, as in the
// full product (the master leaves zeros out of its cut rows): the number
// of nonzero terms of each value is kept with it. The choice between an
// update and a full product depends only on the points and the model,
// never on the number of threads, so solves are deterministic.
const (
	// maxChain is the number of updates after which row values are
	// computed in full again.
	maxChain = 32
	// updateShare is the share of the entries of the rows asked for
	// that the changed columns may hold for an update to be done: past
	// it, the full product (which runs in parallel and reads memory in
	// order) is cheaper.
	updateShare = 0.25
)

// rowCache is what rowValues keeps between calls.
type rowCache struct {
	cols  linkCols
	ref   reference
	spare [][]int32 // term counts to reuse
	// Computations of each kind, for the tests.
	full, updates int
}

// reference is a point whose row values are known: its own copy of the
// choices (blocks past the end of pick choose no column), and its values
// per part for the linking rows 0..rows-1 with their numbers of nonzero
// terms. The values may be shared with cuts, whose values are never
// written after they are made; they are replaced, never written, here
// too.
type reference struct {
	valid bool
	pick  []uint8
	r     [][]float64
	n     [][]int32
	rows  int
	chain int // updates since the values were computed in full
}

// rowValues returns, per part, a_v·x over the part's blocks of pure point
// pt, for the linking rows from..nlink-1.
func (m *Model) rowValues(pt *point, from int) [][]float64 {
	ref := &m.rv.ref
	if !ref.valid || ref.chain >= maxChain {
		return m.fullValues(pt, from)
	}
	m.extendReference()
	m.rv.cols.extend(m.lstart, m.lidx, m.lval, m.ncols)
	changed := m.changedBlocks(pt.pick)
	k := m.nlink()
	if float64(m.changedEntries(pt.pick, changed, from)) > updateShare*float64(m.lstart[k]-m.lstart[from]) {
		return m.fullValues(pt, from)
	}
	out, n := m.updatedValues(pt.pick, changed, from)
	m.rv.updates++
	if from == 0 {
		n, ref.n = ref.n, n
		*ref = reference{valid: true, pick: slices.Clone(pt.pick), r: out, n: ref.n, rows: k, chain: ref.chain + 1}
	}
	m.rv.spare = n
	return out
}

// fullValues returns rowValues(pt, from) by the full product, and makes
// pt the reference when from is 0.
func (m *Model) fullValues(pt *point, from int) [][]float64 {
	k := m.nlink()
	out, n := m.product(pt.pick, from, k, from == 0)
	m.rv.full++
	if from == 0 {
		m.rv.ref = reference{valid: true, pick: slices.Clone(pt.pick), r: out, n: n, rows: k}
	}
	return out
}

// extendReference gives the reference point values in every part, and
// on the linking rows added since they were computed (by the full product
// on those rows).
func (m *Model) extendReference() {
	ref := &m.rv.ref
	for len(ref.r) < m.nparts {
		// A new part holds only blocks the reference chooses nothing in.
		ref.r = append(ref.r, make([]float64, ref.rows))
		ref.n = append(ref.n, make([]int32, ref.rows))
	}
	k := m.nlink()
	if ref.rows == k {
		return
	}
	ext, n := m.product(ref.pick, ref.rows, k, true)
	for p := range ref.r {
		ref.r[p] = slices.Concat(ref.r[p], ext[p])
		ref.n[p] = slices.Concat(ref.n[p], n[p])
	}
	ref.rows = k
}

// chosen returns the column that pick chooses in block b, or -1 if pick
// does not reach the block.
func (m *Model) chosen(pick []uint8, b int) int32 {
	if b >= len(pick) {
		return -1
	}
	return m.bcols[m.bstart[b]+int(pick[b])]
}

// changedBlocks returns, in increasing order, the blocks where pick and
// the reference point choose different columns.
func (m *Model) changedBlocks(pick []uint8) []int {
	ref := m.rv.ref.pick
	var out []int
	for b := range max(len(pick), len(ref)) {
		if b < len(pick) && b < len(ref) && pick[b] == ref[b] {
			continue
		}
		out = append(out, b)
	}
	return out
}

// changedEntries returns the number of column entries an update from the
// reference point to pick on the changed blocks reads (at least those on
// the linking rows from..nlink-1).
func (m *Model) changedEntries(pick []uint8, changed []int, from int) int {
	n := 0
	for _, b := range changed {
		for _, j := range [2]int32{m.chosen(m.rv.ref.pick, b), m.chosen(pick, b)} {
			if j >= 0 {
				n += m.rv.cols.count(j, from)
			}
		}
	}
	return n
}

// updatedValues returns rowValues for pick, and the values' numbers of
// nonzero terms, from the reference point's, which must cover every part
// and linking row: on each changed block it takes off the terms of the
// reference's column and adds those of pick's, in block order.
func (m *Model) updatedValues(pick []uint8, changed []int, from int) ([][]float64, [][]int32) {
	ref := &m.rv.ref
	out := make([][]float64, m.nparts)
	n := m.rv.spare
	for len(n) < m.nparts {
		n = append(n, nil)
	}
	n = n[:m.nparts]
	for p := range out {
		out[p] = make([]float64, len(ref.r[p])-from)
		copy(out[p], ref.r[p][from:])
		n[p] = append(n[p][:0], ref.n[p][from:]...)
	}
	for _, b := range changed {
		p := m.bpart[b]
		if j := m.chosen(ref.pick, b); j >= 0 {
			// a·(-x) is exactly -(a·x): the full product's term.
			m.rv.cols.addTo(out[p], n[p], j, from, -1/m.mult[j], -1)
		}
		if j := m.chosen(pick, b); j >= 0 {
			m.rv.cols.addTo(out[p], n[p], j, from, 1/m.mult[j], 1)
		}
	}
	return out, n
}

// product returns, per part, a_v·x over the part's blocks of the point
// that chooses pick (nothing in blocks past its end), for the linking
// rows from..to-1, by the row-major product, and if counted, the values'
// numbers of nonzero terms. Every value is computed by one goroutine, in
// the order of the row's entries.
func (m *Model) product(pick []uint8, from, to int, counted bool) ([][]float64, [][]int32) {
	if len(m.xs) < m.ncols {
		m.xs = make([]float64, m.ncols)
	}
	x := m.xs[:m.ncols]
	for b := range pick {
		j := m.chosen(pick, b)
		x[j] = 1 / m.mult[j]
	}
	out := make([][]float64, m.nparts)
	var n [][]int32
	for p := range out {
		out[p] = make([]float64, to-from)
		if counted {
			n = append(n, make([]int32, to-from))
		}
	}
	parallelRange(to-from, func(lo, hi int) {
		for v := from + lo; v < from+hi; v++ {
			idx, val := m.lidx[m.lstart[v]:m.lstart[v+1]], m.lval[m.lstart[v]:m.lstart[v+1]]
			if m.nparts == 1 && !counted {
				var s float64
				for e, j := range idx {
					s += val[e] * x[j]
				}
				out[0][v-from] = s
				continue
			}
			for e, j := range idx {
				if xj := x[j]; xj != 0 {
					p := m.bpart[m.block[j]]
					term := val[e] * xj
					out[p][v-from] += term
					if counted && term != 0 {
						n[p][v-from]++
					}
				}
			}
		}
	})
	for b := range pick {
		x[m.chosen(pick, b)] = 0
	}
	return out, n
}

// linkCols is a column-major copy of the linking entries (without t), in
// segments of consecutive linking rows: the rows added between two calls
// of extend make a segment, built from the row-major entries, so that
// most entries are copied once. A segment with fewer than two entries
// per column is built again with the next rows, so that every segment
// but the last has at least two: the copy takes 12 bytes per entry, and
// its segments' column starts (4 bytes per column) at most 2 more per
// entry, and one segment's.
type linkCols struct {
	segs  []colSegment
	rows  int   // linking rows covered
	total []int // entries per column in all segments
}

// colSegment holds the entries of the linking rows lo..hi-1 by column:
// those of column j are row[start[j]:start[j+1]] (rows counted from lo,
// in increasing order) with values val[start[j]:start[j+1]], for the
// columns j below len(start)-1 (the others have none).
type colSegment struct {
	lo, hi int
	start  []int32
	row    []int32
	val    []float64
}

// extend covers the linking rows added since the last call, whose
// entries are idx[start[v]:start[v+1]] and val[...] for row v, on ncols
// columns.
func (c *linkCols) extend(start []int, idx []int32, val []float64, ncols int) {
	k := len(start) - 1
	if k <= c.rows {
		return
	}
	lo := c.rows
	if n := len(c.segs); n > 0 {
		last := c.segs[n-1]
		small := len(last.row) < 2*(len(last.start)-1)
		if small && start[k]-start[last.lo] <= math.MaxInt32 && k-last.lo <= math.MaxInt32 {
			c.segs[n-1] = colSegment{} // let the collector have it before the copy
			c.segs = c.segs[:n-1]
			c.tally(&last, -1)
			lo = last.lo
		}
	}
	for lo < k {
		hi := segmentEnd(start, lo, k)
		if start[hi] > start[lo] {
			c.segs = append(c.segs, newSegment(start, idx, val, lo, hi, ncols))
			c.tally(&c.segs[len(c.segs)-1], 1)
		}
		lo = hi
	}
	c.rows = k
}

// tally adds sign times the entries of each column in segment s to the
// columns' totals.
func (c *linkCols) tally(s *colSegment, sign int) {
	ncols := len(s.start) - 1
	if len(c.total) < ncols {
		c.total = append(c.total, make([]int, ncols-len(c.total))...)
	}
	for j := range ncols {
		c.total[j] += sign * int(s.start[j+1]-s.start[j])
	}
}

// segmentEnd returns the end of the longest run of rows from lo, at most
// to k, whose entries and rows can be counted in int32 (at least one row).
func segmentEnd(start []int, lo, k int) int {
	hi := lo + 1
	for hi < k && hi+1-lo <= math.MaxInt32 && start[hi+1]-start[lo] <= math.MaxInt32 {
		hi++
	}
	return hi
}

// newSegment returns the segment of the linking rows lo..hi-1 (see
// extend for the arguments).
func newSegment(start []int, idx []int32, val []float64, lo, hi, ncols int) colSegment {
	ents := idx[start[lo]:start[hi]]
	s := colSegment{lo: lo, hi: hi, start: make([]int32, ncols+1)}
	for _, j := range ents {
		s.start[j+1]++
	}
	for j := range ncols {
		s.start[j+1] += s.start[j]
	}
	s.row = make([]int32, len(ents))
	s.val = make([]float64, len(ents))
	next := slices.Clone(s.start[:ncols])
	for v := lo; v < hi; v++ {
		for e := start[v]; e < start[v+1]; e++ {
			j := idx[e]
			s.row[next[j]] = int32(v - lo)
			s.val[next[j]] = val[e]
			next[j]++
		}
	}
	return s
}

// count returns the number of entries of column j in the segments that
// reach the rows from on (an upper bound on its entries in those rows;
// all its entries when from is 0).
func (c *linkCols) count(j int32, from int) int {
	if from == 0 {
		if int(j) < len(c.total) {
			return c.total[j]
		}
		return 0
	}
	n := 0
	for i := range c.segs {
		s := &c.segs[i]
		if s.hi > from && int(j) < len(s.start)-1 {
			n += int(s.start[j+1] - s.start[j])
		}
	}
	return n
}

// addTo adds a_vj·x to r[v-from], and dn to n[v-from] if the term is not
// zero, for every entry a_vj of column j on the linking rows from on, in
// increasing order of v. A value left without nonzero terms is set to
// exactly zero.
func (c *linkCols) addTo(r []float64, n []int32, j int32, from int, x float64, dn int32) {
	for i := range c.segs {
		s := &c.segs[i]
		if s.hi <= from || int(j) >= len(s.start)-1 {
			continue
		}
		rows, vals := s.row[s.start[j]:s.start[j+1]], s.val[s.start[j]:s.start[j+1]]
		for e, v := range rows {
			at := s.lo + int(v) - from
			if at < 0 {
				continue
			}
			term := vals[e] * x
			r[at] += term
			if term != 0 {
				n[at] += dn
				if n[at] == 0 {
					r[at] = 0
				}
			}
		}
	}
}

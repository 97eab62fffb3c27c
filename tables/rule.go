package tables

import (
	"fmt"
	"math"
	"math/bits"
	"slices"
)

// A Rule maps a reading vector to the probability of picking each channel.
// Readings are in steps; channels far below all others (outside a
// configuration's subset) read Far. Probs writes all n entries of p, which
// sum to 1. A Rule must be safe for concurrent use.
type Rule interface {
	Probs(r []int, p []float64)
}

// A RowRule is a Rule that gives its probabilities along a row of reading
// vectors, where one channel's reading runs through consecutive steps, in
// less time than a call of Probs per vector. The fast evaluator uses it.
type RowRule interface {
	Rule
	// ProbsRow sets p[i][x], for every member mem[i] of a set of channels
	// and x from 0 to len(p[i])-1, to the probability Probs gives to
	// channel mem[i] at the readings r with r[c] increased by x steps. c
	// is one of mem, no reading of mem is Far, and every channel outside
	// mem reads Far; the rule gives those channels no probability. r is
	// not changed.
	ProbsRow(r []int, c int, mem []int, p [][]float64)
}

// Greedy is the rule that picks the highest reading, sharing ties equally.
type Greedy struct{}

// Probs implements Rule.
func (Greedy) Probs(r []int, p []float64) { argmaxShare(r, nil, p) }

// Offset is the offset rule: it picks the highest r_i + theta_i, sharing
// ties equally. Half[i] is theta_i in half steps.
type Offset struct {
	Half []int
}

// Probs implements Rule.
func (o Offset) Probs(r []int, p []float64) { argmaxShare(r, o.Half, p) }

// ProbsRow implements RowRule.
func (Greedy) ProbsRow(r []int, c int, mem []int, p [][]float64) { shareRow(r, nil, c, mem, p) }

// ProbsRow implements RowRule.
func (o Offset) ProbsRow(r []int, c int, mem []int, p [][]float64) { shareRow(r, o.Half, c, mem, p) }

// shareRow is ProbsRow for argmaxShare: the members other than c give one
// top score and its ties for the whole row, against which c's score
// rises.
func shareRow(r []int, half []int, c int, mem []int, p [][]float64) {
	var tied Set
	top, ci := 0, 0
	for i, ch := range mem {
		if ch == c {
			ci = i
			continue
		}
		switch s := OffsetScore(r[ch], half, ch); {
		case tied == 0 || s > top:
			tied, top = 1<<uint(ch), s
		case s == top:
			tied |= 1 << uint(ch)
		}
	}
	below := 1 / float64(tied.Len())  // c below the others: their tie
	even := 1 / float64(tied.Len()+1) // c tied with them
	for x := range p[0] {
		s := OffsetScore(r[c]+x, half, c)
		for i, ch := range mem {
			var v float64
			switch {
			case s > top:
				if i == ci {
					v = 1
				}
			case s == top:
				if i == ci || tied.Has(ch) {
					v = even
				}
			case tied.Has(ch):
				v = below
			}
			p[i][x] = v
		}
	}
}

// argmaxShare sets p to the uniform distribution over the channels with the
// highest 2*r_i + half_i (half may be nil): Fallback over every channel.
func argmaxShare(r []int, half []int, p []float64) {
	share(Fallback(1<<uint(len(r))-1, r, half), p)
}

// share sets p to the uniform distribution over the channels of tied.
func share(tied Set, p []float64) {
	w := 1 / float64(tied.Len())
	for i := range p {
		p[i] = 0
		if tied.Has(i) {
			p[i] = w
		}
	}
}

// Cell is one cell of a decision table: a vector of reading differences of
// the group's channels that leaves at least two channels not certainly below
// another, and the probability of picking each of them.
type Cell struct {
	// Diff holds r_k - r_first for each member k of the group, in member
	// order (so Diff[0] is 0), in steps.
	Diff []int
	// Alive is the set of members not certainly below another member.
	Alive Set
	// P holds the probability of picking each member, in member order. It
	// is zero outside Alive and sums to 1.
	P []float64
}

// Table is the decision table of one group of channels: the rule used when
// exactly these channels form the top group of the readings.
type Table struct {
	Group   Set
	Members []int
	Cells   []Cell
	span    int // largest |difference| of a key entry: T*(|group|-1)
	// The cell of each key: dense holds index+1 per key (0: no cell)
	// when the keys fit in maxDense entries. Otherwise, when the pages of
	// 2*span+1 keys (all but the lowest digit of the key equal) do,
	// pageOf holds, per page, 0 or one more than its place in pages, which
	// hold index+1 per key for the pages that have cells; and index, a
	// map, past that.
	dense  []int32
	pageOf []int32
	pages  []int32
	index  map[int64]int32
}

// maxDense is the largest number of keys that a table indexes in a flat
// array (4 bytes per key), and the largest number of pages in a paged
// one, instead of a map: 2^25, 128 MiB. Lookups in the array take a
// fraction of a map's time, and the solvers and the fast evaluator look
// up cells for every noise outcome of every configuration they touch
// (five channels with 15-step reach: the table of all five has 121^4 keys
// and 121^3 pages).
const maxDense = 1 << 25

// NewTable returns an empty table for group g under layout l.
func NewTable(l *Layout, g Set) *Table {
	m := g.Members()
	return &Table{Group: g, Members: m, span: l.T * (len(m) - 1)}
}

// keys returns the number of distinct keys of the table, or -1 when it
// exceeds maxDense.
func (t *Table) keys() int { return t.power(len(t.Members) - 1) }

// numPages returns the number of pages of the keys (see Table), or -1
// when it exceeds maxDense.
func (t *Table) numPages() int { return t.power(len(t.Members) - 2) }

// power returns (2*span+1)^e, or -1 when it exceeds maxDense.
func (t *Table) power(e int) int {
	base := 2*t.span + 1
	n := 1
	for range e {
		if n > maxDense/base {
			return -1
		}
		n *= base
	}
	return n
}

// find returns the cell of key k, or -1.
func (t *Table) find(k int64) int {
	if t.dense != nil {
		return int(t.dense[k]) - 1
	}
	if t.pageOf != nil {
		base := int64(2*t.span + 1)
		pg := t.pageOf[k/base]
		if pg == 0 {
			return -1
		}
		return int(t.pages[int64(pg-1)*base+k%base]) - 1
	}
	if c, ok := t.index[k]; ok {
		return int(c)
	}
	return -1
}

// store records that key k is the cell c, allocating the index on first
// use.
func (t *Table) store(k int64, c int) {
	if t.dense == nil && t.pageOf == nil && t.index == nil {
		if n := t.keys(); n > 0 {
			t.dense = make([]int32, n)
		} else if n := t.numPages(); n > 0 {
			t.pageOf = make([]int32, n)
		} else {
			t.index = make(map[int64]int32)
		}
	}
	switch {
	case t.dense != nil:
		t.dense[k] = int32(c + 1)
	case t.pageOf != nil:
		base := int64(2*t.span + 1)
		pg := t.pageOf[k/base]
		if pg == 0 {
			t.pages = append(t.pages, make([]int32, base)...)
			pg = int32(int64(len(t.pages)) / base)
			t.pageOf[k/base] = pg
		}
		t.pages[int64(pg-1)*base+k%base] = int32(c + 1)
	default:
		t.index[k] = int32(c)
	}
}

// Key packs the reading differences of the group's members, relative to the
// first member, into one integer; ok is false when a difference is out of
// the table's range.
func (t *Table) Key(r []int) (key int64, ok bool) {
	base := int64(2*t.span + 1)
	r0 := r[t.Members[0]]
	for i := len(t.Members) - 1; i >= 1; i-- {
		d := r[t.Members[i]] - r0
		if d < -t.span || d > t.span {
			return 0, false
		}
		key = key*base + int64(d+t.span)
	}
	return key, true
}

// Lookup returns the index of the cell for readings r, or -1.
func (t *Table) Lookup(r []int) int {
	k, ok := t.Key(r)
	if !ok {
		return -1
	}
	return t.find(k)
}

// Add appends a cell for readings r with the given alive set and
// probabilities (per member; nil for uniform over alive) and returns its
// index. It returns the existing index if the cell is already present.
func (t *Table) Add(r []int, alive Set, p []float64) int {
	k, ok := t.Key(r)
	if !ok {
		return -1
	}
	if c := t.find(k); c >= 0 {
		return c
	}
	c := Cell{Diff: make([]int, len(t.Members)), Alive: alive, P: make([]float64, len(t.Members))}
	r0 := r[t.Members[0]]
	for i, ch := range t.Members {
		c.Diff[i] = r[ch] - r0
	}
	if p != nil {
		copy(c.P, p)
	} else {
		w := 1 / float64(alive.Len())
		for i, ch := range t.Members {
			if alive.Has(ch) {
				c.P[i] = w
			}
		}
	}
	t.Cells = append(t.Cells, c)
	t.store(k, len(t.Cells)-1)
	return len(t.Cells) - 1
}

// Optimal is a rule given by decision tables, one per group of channels.
// Readings whose top group has a single channel, or a single channel not
// certainly below another, pick it; otherwise the rule looks up the cell of
// the top group's table. A missing cell picks as the offset rule does
// among the alive channels: the one with the highest reading plus its
// offset, r_i + Half[i]/2 steps (the highest reading when Half is nil),
// sharing ties equally (see Fallback).
// Tables of the direct LP cover every reachable cell; tables found by
// constraint generation have cells only where the configurations of the
// working set reach, and leave the rest to the offsets.
type Optimal struct {
	Layout *Layout
	Tables []*Table // in the order of Subsets
	// Half holds the offset of each channel for missing cells, in half
	// steps; nil means none.
	Half  []int
	byset []*Table // indexed by group mask
}

// NewOptimal returns a table rule with an empty table for every group.
func NewOptimal(l *Layout) *Optimal {
	n := l.N()
	o := &Optimal{Layout: l, byset: make([]*Table, 1<<uint(n))}
	for _, s := range Subsets(n) {
		t := NewTable(l, s)
		o.Tables = append(o.Tables, t)
		o.byset[s] = t
	}
	return o
}

// Blank returns tables with the layout of o and its offsets of missing
// cells, and no cells: the start of a copy of o with other probabilities.
func (o *Optimal) Blank() *Optimal {
	out := NewOptimal(o.Layout)
	out.Half = slices.Clone(o.Half)
	return out
}

// SetHalf sets the offsets of missing cells to a copy of half (nil: none)
// after checking that there is one per channel and that each fits in 32
// bits, as the generated C holds it. names, when not nil, names the
// channels in messages.
func (o *Optimal) SetHalf(half []int, names []string) error {
	if half == nil {
		o.Half = nil
		return nil
	}
	if n := o.Layout.N(); len(half) != n {
		return fmt.Errorf("%d offsets for %d channels", len(half), n)
	}
	for i, h := range half {
		if h < math.MinInt32 || h > math.MaxInt32 {
			name := fmt.Sprint(i)
			if names != nil {
				name = fmt.Sprintf("%q", names[i])
			}
			return fmt.Errorf("offset %d of channel %s is out of range", h, name)
		}
	}
	o.Half = slices.Clone(half)
	return nil
}

// Table returns the table of group g, or nil.
func (o *Optimal) Table(g Set) *Table {
	if int(g) >= len(o.byset) {
		return nil
	}
	return o.byset[g]
}

// Locate returns the top group of readings r, its alive channels, and the
// table and cell index that decide (nil and -1 for a forced choice).
func (o *Optimal) Locate(r []int) (g, alive Set, t *Table, cell int) {
	g = o.Layout.TopGroup(r)
	if g.Len() == 1 {
		return g, g, nil, -1
	}
	alive = o.Layout.Alive(g, r)
	if alive.Len() == 1 {
		return g, alive, nil, -1
	}
	t = o.byset[g]
	return g, alive, t, t.Lookup(r)
}

// Probs implements Rule.
func (o *Optimal) Probs(r []int, p []float64) {
	_, alive, t, c := o.Locate(r)
	if t == nil || c < 0 {
		share(Fallback(alive, r, o.Half), p)
		return
	}
	for i := range p {
		p[i] = 0
	}
	for i, ch := range t.Members {
		p[ch] = t.Cells[c].P[i]
	}
}

// ProbsRow implements RowRule. Along the row the top group and its alive
// channels follow from the other members' readings, sorted once: the group
// is a run of them from the highest, with c when its reading falls within
// reach of the run, so that no vector needs the search of TopGroup.
// Vectors where c's reading is outside the group share the probabilities
// of the one before.
func (o *Optimal) ProbsRow(r []int, c int, mem []int, p [][]float64) {
	l := o.Layout
	var rr [32]int
	copy(rr[:], r)
	// The other members, highest reading first: channel and reading.
	var fch, frd [32]int
	m := 0
	for _, ch := range mem {
		if ch == c {
			continue
		}
		j := m
		for ; j > 0 && frd[j-1] < r[ch]; j-- {
			fch[j], frd[j] = fch[j-1], frd[j-1]
		}
		fch[j], frd[j] = ch, r[ch]
		m++
	}
	// chain[j] is the last of the run from j whose consecutive gaps are
	// at most T; set[L] and ceil[L] are the channels of the first L and
	// the greatest r_j - hi_j among them (see Alive); alive[j] is
	// r_j - lo_j.
	var chain, alive [32]int
	var set [33]Set
	var ceil [33]int
	for j := m - 1; j >= 0; j-- {
		chain[j] = j
		if j+1 < m && frd[j]-frd[j+1] <= l.T {
			chain[j] = chain[j+1]
		}
	}
	for j := range m {
		ch := fch[j]
		set[j+1] = set[j] | 1<<uint(ch)
		ceil[j+1] = frd[j] - l.Hi[ch]
		if j > 0 {
			ceil[j+1] = max(ceil[j+1], ceil[j])
		}
		alive[j] = frd[j] - l.Lo[ch]
	}
	var col [32]float64
	above := m  // the other members reading at or above c
	lastL := -1 // the group of the vector before, when without c
	for x := range p[0] {
		v := r[c] + x
		for above > 0 && frd[above-1] < v {
			above--
		}
		// The group: the first L others, and c when in.
		L, in := 0, false
		switch {
		case above > 0 && chain[0] < above-1:
			L = chain[0] + 1
		case above > 0 && frd[above-1]-v > l.T:
			L = above
		default:
			L, in = above, true
			if above < m && v-frd[above] <= l.T {
				L = chain[above] + 1
			}
		}
		if !in && L == lastL {
			for i := range p {
				p[i][x] = p[i][x-1]
			}
			continue
		}
		lastL = -1
		if !in {
			lastL = L
		}
		g := set[L]
		var live Set
		switch {
		case !in && L == 1:
			live = g
		case in && L == 0:
			g, live = 1<<uint(c), 1<<uint(c)
		default:
			top := ceil[L]
			if in {
				g |= 1 << uint(c)
				top = max(top, v-l.Hi[c])
				if v-l.Lo[c] >= top {
					live |= 1 << uint(c)
				}
			}
			for j := range L {
				if alive[j] >= top {
					live |= 1 << uint(fch[j])
				}
			}
		}
		rr[c] = v
		cell := -1
		var t *Table
		if live.Len() > 1 {
			t = o.byset[g]
			cell = t.Lookup(rr[:len(r)])
		}
		if cell >= 0 {
			for i, ch := range t.Members {
				col[ch] = t.Cells[cell].P[i]
			}
		} else {
			tied := Fallback(live, rr[:len(r)], o.Half)
			w := 1 / float64(tied.Len())
			for rest := tied; rest != 0; rest &= rest - 1 {
				col[bits.TrailingZeros32(uint32(rest))] = w
			}
		}
		for i, ch := range mem {
			p[i][x] = col[ch]
			col[ch] = 0
		}
	}
}

// NumCells returns the number of cells over all tables.
func (o *Optimal) NumCells() int {
	n := 0
	for _, t := range o.Tables {
		n += len(t.Cells)
	}
	return n
}

// Check reports an error if a cell's probabilities are negative, not finite,
// put mass outside the alive set, or do not sum to 1 within tol.
func (o *Optimal) Check(tol float64) error {
	for _, t := range o.Tables {
		for ci, c := range t.Cells {
			var s float64
			for i, ch := range t.Members {
				p := c.P[i]
				if !(p >= 0) || p > 1+tol {
					return fmt.Errorf("group %v cell %v: probability %g of channel %d", t.Members, c.Diff, p, ch)
				}
				if p > 0 && !c.Alive.Has(ch) {
					return fmt.Errorf("group %v cell %v: channel %d is certainly below another but has probability %g", t.Members, c.Diff, ch, p)
				}
				s += p
			}
			if s < 1-tol || s > 1+tol {
				return fmt.Errorf("group %v cell %d %v: probabilities sum to %g", t.Members, ci, c.Diff, s)
			}
		}
	}
	return nil
}

// Fallback returns the channels that a table rule picks from when no cell
// decides: those of alive with the highest 2*r_i + half[i] (the highest
// reading plus its offset; half may be nil, for no offsets). The rule picks
// each of them with equal probability, as the offset rule shares its ties.
// For a forced choice this is the only alive channel. Sharing a tie rather
// than breaking it one way keeps the balance of the offsets of
// Layout.OffsetHalfSteps, which are chosen for shared ties: on five
// channels with 5-point pmfs (pickwise-bench's n5-pmf5), tables without
// cells have a worst case of 0.7220 steps when ties are shared and 0.8534
// when the lowest-numbered channel takes them, and constraint generation,
// whose tables leave the cells outside its working set to this rule,
// certified a gap of 1.4e-4 steps after 240 s instead of 1.7e-3.
func Fallback(alive Set, r []int, half []int) Set {
	var tied Set
	top := 0
	for i := range r {
		if !alive.Has(i) {
			continue
		}
		switch s := OffsetScore(r[i], half, i); {
		case tied == 0 || s > top:
			tied, top = 1<<uint(i), s
		case s == top:
			tied |= 1 << uint(i)
		}
	}
	return tied
}

// OffsetScore returns the score by which the offset rule and Fallback rank
// channel i with reading r: 2*r + half[i] (2*r when half is nil), the
// reading plus its offset in half steps.
func OffsetScore(r int, half []int, i int) int {
	if half == nil {
		return 2 * r
	}
	return 2*r + half[i]
}

package fast

import (
	"fmt"
	"sync"
	"sync/atomic"

	"github.com/pickwise/pickwise/tables"
)

// chunk is the length of the runs along the last axis that the passes
// work on at a time.
const chunk = 256

// maxSpan bounds k*d, the largest value difference of a configuration, so
// that reading differences stay far above tables.Far/2 and box sizes fit
// in an int.
const maxSpan = 1 << 30

// subset evaluates the regrets of one subset of channels, tile by tile.
//
// Arrays are indexed by the k = m-1 value (or reading) differences
// x_c - x_0 of the members 1..k against member 0, in row-major order with
// the last axis contiguous. Axis a holds the difference of member a+1.
type subset struct {
	l       *tables.Layout
	rule    tables.Rule
	mem     []int
	k       int
	d       int
	span    int         // k*d: configurations have differences in [-span, span]
	lo, w   []int       // noise offset and spread of each member, in steps
	p       [][]float64 // noise pmf of each member
	workers int
	tile    []int // extent of a tile along each axis

	x       [][]float64 // X_i of each member over a tile's reading box
	r       []float64   // regrets over a tile
	scratch []scratch
	fault   atomic.Bool // the rule gave probability to a channel outside the subset
}

// scratch is one goroutine's work space.
type scratch struct {
	r   []int
	p   []float64
	tmp []float64
	idx []int
}

func newSubset(l *tables.Layout, rule tables.Rule, q tables.Set, d, workers int, maxBytes int64) (*subset, error) {
	mem := q.Members()
	m := len(mem)
	k := m - 1
	if d > maxSpan/k {
		return nil, fmt.Errorf("fast: gap bound %d is too large for %d channels", d, m)
	}
	s := &subset{l: l, rule: rule, mem: mem, k: k, d: d, span: k * d, workers: workers}
	for _, c := range mem {
		s.lo = append(s.lo, l.Lo[c])
		s.w = append(s.w, l.Hi[c]-l.Lo[c])
		s.p = append(s.p, l.P[c])
	}
	// Start with one tile covering the box [-span, span]^k and halve the
	// longest side until the work arrays fit the budget.
	s.tile = make([]int, k)
	for a := range s.tile {
		s.tile[a] = 2*s.span + 1
	}
	for {
		need := s.bytes()
		if need <= float64(maxBytes) {
			break
		}
		a := 0
		for b := range s.tile {
			if s.tile[b] > s.tile[a] {
				a = b
			}
		}
		if s.tile[a] == 1 {
			return nil, fmt.Errorf("fast: subset %v needs %.3g bytes even in the smallest tiles, over the budget of %d", mem, need, maxBytes)
		}
		s.tile[a] = (s.tile[a] + 1) / 2
	}
	n := l.N()
	s.scratch = make([]scratch, workers)
	for i := range s.scratch {
		sc := &s.scratch[i]
		sc.r = make([]int, n)
		for c := range sc.r {
			sc.r[c] = tables.Far
		}
		sc.r[mem[0]] = 0
		sc.p = make([]float64, n)
		sc.tmp = make([]float64, chunk)
		sc.idx = make([]int, k)
	}
	return s, nil
}

// xext returns the extent of the reading box of a tile of extent ext
// along axis a.
func (s *subset) xext(ext []int, a int) int { return ext[a] + s.w[a+1] + s.w[0] }

// bytes returns the memory the work arrays of a tile take.
func (s *subset) bytes() float64 {
	xs, rs := 1.0, 1.0
	for a, t := range s.tile {
		xs *= float64(s.xext(s.tile, a))
		rs *= float64(t)
	}
	per := float64(len(s.l.Lo))*16 + float64(s.k)*8 + chunk*8
	return 8*(float64(s.k+1)*xs+rs) + float64(s.workers)*per
}

// run evaluates every tile and reports the configurations in it.
func (s *subset) run(fn func(v []int, regret float64)) error {
	k := s.k
	ntiles := make([]int, k)
	for a := range ntiles {
		ntiles[a] = (2*s.span + s.tile[a]) / s.tile[a]
	}
	xsize, rsize := 1, 1
	for a, t := range s.tile {
		xsize *= s.xext(s.tile, a)
		rsize *= t
	}
	s.x = make([][]float64, k+1)
	for i := range s.x {
		s.x[i] = make([]float64, xsize)
	}
	s.r = make([]float64, rsize)
	t := make([]int, k)
	ulo := make([]int, k)
	ext := make([]int, k)
	v := make([]int, s.l.N())
	for c := range v {
		v[c] = tables.Far
	}
	for {
		for a := range t {
			ulo[a] = -s.span + t[a]*s.tile[a]
			ext[a] = min(s.tile[a], s.span-ulo[a]+1)
		}
		if err := s.regrets(ulo, ext); err != nil {
			return err
		}
		s.report(ulo, ext, v, fn)
		if !next(t, ntiles) {
			return nil
		}
	}
}

// next advances the row-major multi-index t within extents ext and
// reports whether it did not wrap around.
func next(t, ext []int) bool {
	for a := len(t) - 1; a >= 0; a-- {
		t[a]++
		if t[a] < ext[a] {
			return true
		}
		t[a] = 0
	}
	return false
}

// decode sets idx to the row-major multi-index of flat index i within
// extents ext and returns sum idx[a]*stride[a].
func decode(i int, ext, stride, idx []int) int {
	off := 0
	for a := len(ext) - 1; a >= 0; a-- {
		idx[a] = i % ext[a]
		i /= ext[a]
		off += idx[a] * stride[a]
	}
	return off
}

// strides returns row-major strides for extents ext.
func strides(ext []int) []int {
	st := make([]int, len(ext))
	s := 1
	for a := len(ext) - 1; a >= 0; a-- {
		st[a] = s
		s *= ext[a]
	}
	return st
}

// prod returns the product of x (1 for an empty x).
func prod(x []int) int {
	p := 1
	for _, v := range x {
		p *= v
	}
	return p
}

// parallel calls fn(worker, lo, hi) on blocks [lo, hi) covering 0..units-1
// from at most workers goroutines. Each unit is computed by exactly one
// call, so results do not depend on how the blocks fall.
func parallel(workers, units int, fn func(w, lo, hi int)) {
	if units <= 0 {
		return
	}
	workers = min(workers, units)
	if workers <= 1 {
		fn(0, 0, units)
		return
	}
	block := max(1, units/(8*workers))
	var nextUnit atomic.Int64
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				lo := int(nextUnit.Add(int64(block))) - block
				if lo >= units {
					return
				}
				fn(w, lo, min(lo+block, units))
			}
		}()
	}
	wg.Wait()
}

// regrets fills s.r with the regret at every value difference vector of
// the tile with lowest corner ulo and extents ext.
func (s *subset) regrets(ulo, ext []int) error {
	k := s.k
	xext := make([]int, k)
	xlo := make([]int, k)
	hi0 := s.lo[0] + s.w[0]
	for a := range xext {
		xext[a] = s.xext(ext, a)
		// D = u + a_c - a_0 with a_c >= lo_c and a_0 <= hi_0.
		xlo[a] = ulo[a] + s.lo[a+1] - hi0
	}
	size := prod(xext)
	xst := strides(xext)
	s.evalRule(xlo, xext)
	if s.fault.Load() {
		return fmt.Errorf("fast: the rule gives probability to a channel outside subset %v", s.mem)
	}
	rs := s.r[:prod(ext)]
	clear(rs)
	cur := make([]int, k)
	for i := range s.mem {
		a := s.x[i][:size]
		if allZero(a) {
			continue
		}
		copy(cur, xext)
		for ax := 0; ax < k; ax++ {
			s.axisPass(a, xst, cur, ax)
		}
		s.diagPass(a, xst, ulo, ext, i, rs)
	}
	return nil
}

func allZero(a []float64) bool {
	for _, x := range a {
		if x != 0 {
			return false
		}
	}
	return true
}

// evalRule fills s.x[i] with the probability that the rule picks member i
// at reading differences xlo + j over the box of extents xext.
func (s *subset) evalRule(xlo, xext []int) {
	k := s.k
	last := xext[k-1]
	outer := xext[:k-1]
	ost := strides(outer)
	parallel(s.workers, prod(outer), func(w, lo, hi int) {
		sc := &s.scratch[w]
		r, p := sc.r, sc.p
		for row := lo; row < hi; row++ {
			decode(row, outer, ost, sc.idx)
			for a := 0; a < k-1; a++ {
				r[s.mem[a+1]] = xlo[a] + sc.idx[a]
			}
			base := row * last
			for j := 0; j < last; j++ {
				r[s.mem[k]] = xlo[k-1] + j
				s.rule.Probs(r, p)
				for i, c := range s.mem {
					s.x[i][base+j] = p[c]
				}
				for c, pc := range p {
					if pc != 0 && r[c] == tables.Far {
						s.fault.Store(true)
					}
				}
			}
		}
	})
}

// axisPass replaces a, over the current extents cur, by its correlation
// along axis ax with the noise pmf of member ax+1:
// out[.., j, ..] = sum_t p[t] in[.., j+t, ..], t in increasing order. The
// extent along ax shrinks by the member's spread; the result stays at the
// low indices, in place.
func (s *subset) axisPass(a []float64, st, cur []int, ax int) {
	k := s.k
	pa := s.p[ax+1]
	w := s.w[ax+1]
	newLen := cur[ax] - w
	if ax == k-1 {
		outer := cur[:k-1]
		ost := st[:k-1]
		parallel(s.workers, prod(outer), func(wk, lo, hi int) {
			sc := &s.scratch[wk]
			for row := lo; row < hi; row++ {
				base := decode(row, outer, ost, sc.idx)
				line := a[base : base+cur[ax]]
				for j := 0; j < newLen; j++ {
					var acc float64
					for t, pt := range pa {
						acc += pt * line[j+t]
					}
					line[j] = acc
				}
			}
		})
		cur[ax] = newLen
		return
	}
	// Lines along ax for every index of the other axes but the last,
	// and chunks of the last axis.
	var oext, ost []int
	for b := 0; b < k-1; b++ {
		if b != ax {
			oext = append(oext, cur[b])
			ost = append(ost, st[b])
		}
	}
	lastLen := cur[k-1]
	nchunk := (lastLen + chunk - 1) / chunk
	sa := st[ax]
	parallel(s.workers, prod(oext)*nchunk, func(wk, lo, hi int) {
		sc := &s.scratch[wk]
		for u := lo; u < hi; u++ {
			base := decode(u/nchunk, oext, ost, sc.idx[:len(oext)])
			e0 := (u % nchunk) * chunk
			n := min(chunk, lastLen-e0)
			base += e0
			tmp := sc.tmp[:n]
			for j := 0; j < newLen; j++ {
				src := a[base+j*sa:][:n]
				p0 := pa[0]
				for e := range tmp {
					tmp[e] = p0 * src[e]
				}
				for t := 1; t <= w; t++ {
					src := a[base+(j+t)*sa:][:n]
					pt := pa[t]
					for e := range tmp {
						tmp[e] += pt * src[e]
					}
				}
				copy(a[base+j*sa:][:n], tmp)
			}
		}
	})
	cur[ax] = newLen
}

// diagPass adds to rs, at every value difference vector u of the tile,
// (max u - u_i) P_i(u), where P_i(u) = sum_t p_0[t] Y_i(u - (lo_0+t)·1)
// and a holds Y_i with its lowest corner at u_lo - hi_0·1: the pass along
// the diagonal for the noise of member 0.
func (s *subset) diagPass(a []float64, st, ulo, ext []int, i int, rs []float64) {
	k := s.k
	p0 := s.p[0]
	w0 := s.w[0]
	dsum := 0
	for _, x := range st {
		dsum += x
	}
	outer := ext[:k-1]
	ost := st[:k-1]
	lastLen := ext[k-1]
	nchunk := (lastLen + chunk - 1) / chunk
	parallel(s.workers, prod(outer)*nchunk, func(wk, lo, hi int) {
		sc := &s.scratch[wk]
		for u := lo; u < hi; u++ {
			row := u / nchunk
			baseA := decode(row, outer, ost, sc.idx[:k-1])
			baseR := row * lastLen
			// The weight max u - u_i: the part from the axes before the
			// last is fixed along the row.
			mo, ui := 0, 0
			for b := 0; b < k-1; b++ {
				ub := ulo[b] + sc.idx[b]
				mo = max(mo, ub)
				if b+1 == i {
					ui = ub
				}
			}
			e0 := (u % nchunk) * chunk
			n := min(chunk, lastLen-e0)
			// Skip runs where member i is the top at every u.
			need := false
			for e := 0; e < n; e++ {
				ul := ulo[k-1] + e0 + e
				if i == k {
					ui = ul
				}
				if max(mo, ul) != ui {
					need = true
					break
				}
			}
			if !need {
				continue
			}
			tmp := sc.tmp[:n]
			for t, pt := range p0 {
				src := a[baseA+(w0-t)*dsum+e0:][:n]
				if t == 0 {
					for e := range tmp {
						tmp[e] = pt * src[e]
					}
					continue
				}
				for e := range tmp {
					tmp[e] += pt * src[e]
				}
			}
			out := rs[baseR+e0:][:n]
			for e := range tmp {
				ul := ulo[k-1] + e0 + e
				if i == k {
					ui = ul
				}
				if wt := max(mo, ul) - ui; wt != 0 {
					out[e] += float64(wt) * tmp[e]
				}
			}
		}
	})
}

// report calls fn for every configuration in the tile: every u whose
// values (0, u_1, ..., u_k) have sorted consecutive gaps of at most d.
func (s *subset) report(ulo, ext []int, v []int, fn func(v []int, regret float64)) {
	k := s.k
	idx := make([]int, k)
	var sorted [16]int
	flat := 0
	for {
		lowest := 0
		sorted[0] = 0
		for a := 0; a < k; a++ {
			ua := ulo[a] + idx[a]
			sorted[a+1] = ua
			lowest = min(lowest, ua)
		}
		sortSmall(sorted[:k+1])
		ok := true
		for a := 0; a < k; a++ {
			if sorted[a+1]-sorted[a] > s.d {
				ok = false
				break
			}
		}
		if ok {
			v[s.mem[0]] = -lowest
			for a := 0; a < k; a++ {
				v[s.mem[a+1]] = ulo[a] + idx[a] - lowest
			}
			fn(v, s.r[flat])
		}
		flat++
		if !next(idx, ext) {
			return
		}
	}
}

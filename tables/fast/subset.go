package fast

import (
	"fmt"
	"math"
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
	need    []*spans    // what each stage needs for every configuration
	ni      []*spans    // what each stage needs for one member
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
	// Spans: two sets of k+2 stages of at most xs / (last extent) rows,
	// 16 bytes each.
	spans := float64(2*(s.k+2)) * 16 * xs / float64(s.xext(s.tile, s.k-1))
	per := float64(len(s.l.Lo))*16 + float64(s.k)*16 + chunk*8
	return 8*(float64(s.k+1)*xs+rs) + spans + float64(s.workers)*per
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
	s.need = make([]*spans, k+2)
	s.ni = make([]*spans, k+2)
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
		cfg, err := s.regrets(ulo, ext)
		if err != nil {
			return err
		}
		s.report(ulo, ext, cfg, v, fn)
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

// spans holds, for every row of a stage of the computation (every index
// of the axes before the last, row-major), the interval [lo, hi] of
// indices along the last axis whose values are needed; lo > hi for a row
// that needs none. Values outside the spans are never computed and never
// read by a needed value.
type spans struct {
	ext    []int // extents of the axes before the last
	lo, hi []int
}

// reuse returns sp, allocated if nil, resized to extents ext; its
// intervals are unspecified.
func reuse(sp *spans, ext []int) *spans {
	n := prod(ext)
	if sp == nil {
		sp = new(spans)
	}
	sp.ext = append(sp.ext[:0], ext...)
	if cap(sp.lo) < n {
		sp.lo, sp.hi = make([]int, n), make([]int, n)
	}
	sp.lo, sp.hi = sp.lo[:n], sp.hi[:n]
	return sp
}

// stageExt returns the extents of the array after st axis passes over a
// tile of extents ext: st = 0 is the box of reading differences, st = k
// the box of Y, before the diagonal pass.
func (s *subset) stageExt(ext []int, st int) []int {
	e := make([]int, s.k)
	for a := range e {
		e[a] = ext[a] + s.w[0]
		if a >= st {
			e[a] += s.w[a+1]
		}
	}
	return e
}

// regrets fills s.r with the regret at every configuration of the tile
// with lowest corner ulo and extents ext (other entries of s.r are
// unspecified) and returns the spans of the configurations.
func (s *subset) regrets(ulo, ext []int) (*spans, error) {
	k := s.k
	xext := s.stageExt(ext, 0)
	xlo := make([]int, k)
	hi0 := s.lo[0] + s.w[0]
	for a := range xlo {
		// D = u + a_c - a_0 with a_c >= lo_c and a_0 <= hi_0.
		xlo[a] = ulo[a] + s.lo[a+1] - hi0
	}
	size := prod(xext)
	xst := strides(xext)

	// Work backwards from the configurations to the values each stage
	// needs.
	need, ni := s.need, s.ni
	need[k+1] = s.validSpans(need[k+1], ulo, ext)
	need[k] = s.diagDilate(need[k], need[k+1])
	for ax := k - 1; ax >= 0; ax-- {
		need[ax] = s.axisDilate(need[ax], need[ax+1], ax)
	}

	// Values outside the spans keep whatever an earlier channel or tile
	// left there: no needed value reads them.
	nonzero := s.evalRule(xlo, xext, need[0])
	if s.fault.Load() {
		return nil, fmt.Errorf("fast: the rule gives probability to a channel outside subset %v", s.mem)
	}
	rs := s.r[:prod(ext)]
	clear(rs)
	for i := range s.mem {
		if !nonzero[i] {
			continue
		}
		// Member i adds nothing where it holds the highest value: work
		// back from the configurations where it does not.
		ni[k+1] = s.belowTop(ni[k+1], ulo, need[k+1], i)
		ni[k] = s.diagDilate(ni[k], ni[k+1])
		for ax := k - 1; ax >= 0; ax-- {
			ni[ax] = s.axisDilate(ni[ax], ni[ax+1], ax)
		}
		a := s.x[i][:size]
		for ax := 0; ax < k; ax++ {
			s.axisPass(a, xst, ax, ni[ax+1], s.stageExt(ext, ax+1))
		}
		s.diagPass(a, xst, ulo, ext, i, rs, ni[k+1])
	}
	return need[k+1], nil
}

// belowTop returns the part of the spans cfg (of the tile with lowest
// corner ulo) where member i's value is below the highest: where
// max u - u_i > 0, with u_0 = 0.
func (s *subset) belowTop(dst *spans, ulo []int, cfg *spans, i int) *spans {
	k := s.k
	out := reuse(dst, cfg.ext)
	rst := strides(cfg.ext)
	idx := make([]int, k-1)
	for row := range cfg.lo {
		lo, hi := cfg.lo[row], cfg.hi[row]
		decode(row, cfg.ext, rst, idx)
		top, ui := 0, 0 // highest fixed value, and u_i if fixed
		for a := range idx {
			u := ulo[a] + idx[a]
			top = max(top, u)
			if a+1 == i {
				ui = u
			}
		}
		switch {
		case i == k:
			// u_i is the last difference x: below top when x < top.
			hi = min(hi, top-1-ulo[k-1])
		case ui == top:
			// u_i is the highest fixed value: below top when x > u_i.
			lo = max(lo, ui+1-ulo[k-1])
		}
		if lo > hi {
			lo, hi = 1, 0
		}
		out.lo[row], out.hi[row] = lo, hi
	}
	return out
}

// lastRange returns the values x of the last difference for which
// (0, u..., x) are the value differences of a configuration, where u holds
// the other differences: they form the interval [lo, hi] (empty when
// lo > hi). Sorted, the fixed values f may have at most one gap wider than
// d, which x must split; with none, x may lie anywhere within d of them.
func (s *subset) lastRange(u []int) (lo, hi int) {
	var f [16]int
	m := len(u) + 1
	copy(f[1:], u)
	sortSmall(f[:m])
	lo, hi = f[0]-s.d, f[m-1]+s.d
	wide := 0
	for a := 1; a < m; a++ {
		if f[a]-f[a-1] > s.d {
			wide++
			lo, hi = f[a]-s.d, f[a-1]+s.d
		}
	}
	if wide > 1 {
		return 1, 0
	}
	return lo, hi
}

// validSpans returns, for every row of the tile, the configurations along
// the last axis: an interval, by lastRange.
func (s *subset) validSpans(dst *spans, ulo, ext []int) *spans {
	k := s.k
	out := reuse(dst, ext[:k-1])
	rst := strides(out.ext)
	last := ext[k-1]
	u := make([]int, k-1)
	for row := range out.lo {
		decode(row, out.ext, rst, u)
		for a := range u {
			u[a] += ulo[a]
		}
		lo, hi := s.lastRange(u)
		lo, hi = max(lo-ulo[k-1], 0), min(hi-ulo[k-1], last-1)
		if lo > hi {
			lo, hi = 1, 0
		}
		out.lo[row], out.hi[row] = lo, hi
	}
	return out
}

// diagDilate returns the spans of Y that the diagonal pass needs to
// produce the spans out: P at i reads Y at i + t(1, ..., 1), t in
// [0, w_0].
func (s *subset) diagDilate(dst, out *spans) *spans {
	w0 := s.w[0]
	ext := append([]int(nil), out.ext...)
	for a := range ext {
		ext[a] += w0
	}
	in := reuse(dst, ext)
	n := len(in.ext)
	ist, ost := strides(in.ext), strides(out.ext)
	diag := 0
	for _, x := range ost {
		diag += x
	}
	parallel(s.workers, len(in.lo), func(wk, lo, hi int) {
		sc := &s.scratch[wk]
		for row := lo; row < hi; row++ {
			decode(row, in.ext, ist, sc.idx)
			// orow is the row's index in out's layout (when in range).
			orow := 0
			least := math.MaxInt
			for a := 0; a < n; a++ {
				orow += sc.idx[a] * ost[a]
				least = min(least, sc.idx[a])
			}
			rlo, rhi := math.MaxInt, math.MinInt
			for t := 0; t <= w0; t++ {
				if t > least {
					break
				}
				inRange := true
				for a := 0; a < n; a++ {
					if sc.idx[a]-t >= out.ext[a] {
						inRange = false
						break
					}
				}
				if inRange {
					r := orow - t*diag
					if out.lo[r] <= out.hi[r] {
						rlo = min(rlo, out.lo[r]+t)
						rhi = max(rhi, out.hi[r]+t)
					}
				}
			}
			if rlo > rhi {
				rlo, rhi = 1, 0
			}
			in.lo[row], in.hi[row] = rlo, rhi
		}
	})
	return in
}

// axisDilate returns the spans that the pass along axis ax needs to
// produce the spans out: the output at j reads the input at j + t along
// ax, t in [0, w].
func (s *subset) axisDilate(dst, out *spans, ax int) *spans {
	w := s.w[ax+1]
	k := s.k
	if ax == k-1 {
		in := reuse(dst, out.ext)
		for r := range out.lo {
			in.lo[r], in.hi[r] = out.lo[r], out.hi[r]
			if out.lo[r] <= out.hi[r] {
				in.hi[r] += w
			}
		}
		return in
	}
	ext := append([]int(nil), out.ext...)
	ext[ax] += w
	in := reuse(dst, ext)
	ist, ost := strides(in.ext), strides(out.ext)
	parallel(s.workers, len(in.lo), func(wk, lo, hi int) {
		sc := &s.scratch[wk]
		for row := lo; row < hi; row++ {
			decode(row, in.ext, ist, sc.idx)
			base := 0
			for a := range in.ext {
				if a != ax {
					base += sc.idx[a] * ost[a]
				}
			}
			rlo, rhi := math.MaxInt, math.MinInt
			for t := 0; t <= w; t++ {
				j := sc.idx[ax] - t
				if j < 0 {
					break
				}
				if j >= out.ext[ax] {
					continue
				}
				r := base + j*ost[ax]
				if out.lo[r] <= out.hi[r] {
					rlo = min(rlo, out.lo[r])
					rhi = max(rhi, out.hi[r])
				}
			}
			if rlo > rhi {
				rlo, rhi = 1, 0
			}
			in.lo[row], in.hi[row] = rlo, rhi
		}
	})
	return in
}

// evalRule sets s.x[i], over the spans need of the box of reading
// differences with lowest corner xlo and extents xext, to the probability
// that the rule picks member i, and reports for each member whether any of
// these probabilities is not zero.
func (s *subset) evalRule(xlo, xext []int, need *spans) []bool {
	k := s.k
	last := xext[k-1]
	rst := strides(need.ext)
	nonzero := make([][]bool, s.workers)
	for w := range nonzero {
		nonzero[w] = make([]bool, k+1)
	}
	parallel(s.workers, len(need.lo), func(w, lo, hi int) {
		sc := &s.scratch[w]
		r, p := sc.r, sc.p
		nz := nonzero[w]
		for row := lo; row < hi; row++ {
			decode(row, need.ext, rst, sc.idx)
			for a := 0; a < k-1; a++ {
				r[s.mem[a+1]] = xlo[a] + sc.idx[a]
			}
			base := row * last
			for j := need.lo[row]; j <= need.hi[row]; j++ {
				r[s.mem[k]] = xlo[k-1] + j
				s.rule.Probs(r, p)
				for i, c := range s.mem {
					s.x[i][base+j] = p[c]
					if p[c] != 0 {
						nz[i] = true
					}
				}
				for c, pc := range p {
					if pc != 0 && r[c] == tables.Far {
						s.fault.Store(true)
					}
				}
			}
		}
	})
	for w := 1; w < s.workers; w++ {
		for i, b := range nonzero[w] {
			nonzero[0][i] = nonzero[0][i] || b
		}
	}
	return nonzero[0]
}

// axisPass replaces a by its correlation along axis ax with the noise
// pmf of member ax+1, over the spans out of the output (whose extents are
// outExt): out[.., j, ..] = sum_t p[t] in[.., j+t, ..], with t in
// increasing order. The result stays at the low indices, in place.
func (s *subset) axisPass(a []float64, st []int, ax int, out *spans, outExt []int) {
	k := s.k
	pa := s.p[ax+1]
	if ax == k-1 {
		parallel(s.workers, len(out.lo), func(wk, lo, hi int) {
			sc := &s.scratch[wk]
			for row := lo; row < hi; row++ {
				base := decode(row, out.ext, st[:k-1], sc.idx)
				correlate(a[base:], pa, out.lo[row], out.hi[row])
			}
		})
		return
	}
	// Lines along ax for every index of the other axes but the last, and
	// chunks of the last axis.
	var oext, ost, orst []int
	rst := strides(out.ext)
	for b := 0; b < k-1; b++ {
		if b != ax {
			oext = append(oext, out.ext[b])
			ost = append(ost, st[b])
			orst = append(orst, rst[b])
		}
	}
	lastLen := outExt[k-1]
	nchunk := (lastLen + chunk - 1) / chunk
	sa, ra := st[ax], rst[ax]
	parallel(s.workers, prod(oext)*nchunk, func(wk, lo, hi int) {
		sc := &s.scratch[wk]
		for u := lo; u < hi; u++ {
			base := decode(u/nchunk, oext, ost, sc.idx[:len(oext)])
			rbase := 0
			for b := range oext {
				rbase += sc.idx[b] * orst[b]
			}
			e0 := (u % nchunk) * chunk
			e1 := min(e0+chunk, lastLen)
			for j := 0; j < outExt[ax]; j++ {
				r := rbase + j*ra
				a0, a1 := max(out.lo[r], e0), min(out.hi[r]+1, e1)
				if a0 >= a1 {
					continue
				}
				tmp := sc.tmp[:a1-a0]
				rows(tmp, a[base+j*sa+a0:], sa, pa)
				copy(a[base+j*sa+a0:], tmp)
			}
		}
	})
}

// correlate sets line[j] = sum_t p[t] line[j+t] (t increasing) for j in
// [lo, hi], in increasing order of j, four outputs at a time.
func correlate(line []float64, p []float64, lo, hi int) {
	j := lo
	for ; j+3 <= hi; j += 4 {
		var a0, a1, a2, a3 float64
		x := line[j : j+len(p)+3]
		for t, pt := range p {
			y := x[t : t+4]
			a0 += pt * y[0]
			a1 += pt * y[1]
			a2 += pt * y[2]
			a3 += pt * y[3]
		}
		line[j], line[j+1], line[j+2], line[j+3] = a0, a1, a2, a3
	}
	for ; j <= hi; j++ {
		var acc float64
		for t, pt := range p {
			acc += pt * line[j+t]
		}
		line[j] = acc
	}
}

// rows sets tmp[e] = sum_t p[t] src[t*stride+e] (t increasing), taking
// four terms of p at a time.
func rows(tmp, src []float64, stride int, p []float64) {
	n := len(tmp)
	s0 := src[:n]
	p0 := p[0]
	for e := range tmp {
		tmp[e] = p0 * s0[e]
	}
	t := 1
	for ; t+3 < len(p); t += 4 {
		s1 := src[t*stride:][:n]
		s2 := src[(t+1)*stride:][:n]
		s3 := src[(t+2)*stride:][:n]
		s4 := src[(t+3)*stride:][:n]
		p1, p2, p3, p4 := p[t], p[t+1], p[t+2], p[t+3]
		for e := range tmp {
			tmp[e] = tmp[e] + p1*s1[e] + p2*s2[e] + p3*s3[e] + p4*s4[e]
		}
	}
	for ; t < len(p); t++ {
		s1 := src[t*stride:][:n]
		p1 := p[t]
		for e := range tmp {
			tmp[e] += p1 * s1[e]
		}
	}
}

// diagPass adds to rs, at every configuration u of the tile (the spans
// out), (max u - u_i) P_i(u), where P_i(u) = sum_t p_0[t] Y_i(u - (lo_0+t)·1)
// and a holds Y_i with its lowest corner at u_lo - hi_0·1: the pass along
// the diagonal for the noise of member 0.
func (s *subset) diagPass(a []float64, st, ulo, ext []int, i int, rs []float64, out *spans) {
	k := s.k
	w0 := s.w[0]
	// Reversed so that t runs over the offsets of a in increasing order:
	// P(u) = sum_t q[t] a[u + t·1] with q[t] = p_0[w_0 - t].
	q := make([]float64, w0+1)
	for t := range q {
		q[t] = s.p[0][w0-t]
	}
	dsum := 0
	for _, x := range st {
		dsum += x
	}
	lastLen := ext[k-1]
	nchunk := (lastLen + chunk - 1) / chunk
	parallel(s.workers, len(out.lo)*nchunk, func(wk, lo, hi int) {
		sc := &s.scratch[wk]
		for u := lo; u < hi; u++ {
			row := u / nchunk
			e0 := (u % nchunk) * chunk
			a0, a1 := max(out.lo[row], e0), min(out.hi[row]+1, e0+chunk, lastLen)
			if a0 >= a1 {
				continue
			}
			baseA := decode(row, out.ext, st[:k-1], sc.idx[:k-1])
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
			tmp := sc.tmp[:a1-a0]
			rows(tmp, a[baseA+a0:], dsum, q)
			dst := rs[baseR+a0:][:a1-a0]
			for e := range tmp {
				ul := ulo[k-1] + a0 + e
				if i == k {
					ui = ul
				}
				if wt := max(mo, ul) - ui; wt != 0 {
					dst[e] += float64(wt) * tmp[e]
				}
			}
		}
	})
}

// report calls fn for every configuration in the tile: every entry of
// the spans cfg.
func (s *subset) report(ulo, ext []int, cfg *spans, v []int, fn func(v []int, regret float64)) {
	k := s.k
	idx := make([]int, k)
	u := make([]int, k)
	rst := strides(cfg.ext)
	last := ext[k-1]
	for row := range cfg.lo {
		decode(row, cfg.ext, rst, idx)
		for a := 0; a < k-1; a++ {
			u[a] = ulo[a] + idx[a]
		}
		for j := cfg.lo[row]; j <= cfg.hi[row]; j++ {
			u[k-1] = ulo[k-1] + j
			lowest := 0
			for _, x := range u {
				lowest = min(lowest, x)
			}
			v[s.mem[0]] = -lowest
			for a := 0; a < k; a++ {
				v[s.mem[a+1]] = u[a] - lowest
			}
			fn(v, s.r[row*last+j])
		}
	}
}

package fast

import (
	"fmt"
	"math"
	"slices"
	"sync"
	"sync/atomic"

	"github.com/pickwise/pickwise/tables"
)

// chunk is the length of the runs along the last axis that the passes
// work on at a time.
const chunk = 256

// passBlock is the number of rows next to each other that a pass along
// an axis other than the last works on at a time.
const passBlock = 8

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
	sup0    []*spans    // where each member's X is not zero (see support)
	sup     []*spans    // where the stages of one member can be nonzero
	far     []int       // the channels outside the subset
	scratch []scratch
	fault   atomic.Bool // the rule gave probability to a channel outside the subset
	work    *work       // where x, r and need come from; nil for arrays of its own
	budget  int64       // the memory budget
	planes  []planes    // the rows that the pass along each axis but the last needs
}

// planes holds, for spans split along axis ax into planes (o, j) of rows
// (o, j, r), o the indices of the axes before ax, j the index along ax
// and r those of the axes after it, the first and last r of each plane
// whose row is not empty (first > last for none).
type planes struct {
	first, last []int
}

// find sets p to the planes of sp along axis ax.
func (p *planes) find(sp *spans, ax int, workers int) {
	n := prod(sp.ext[:ax+1])
	inner := prod(sp.ext[ax+1:])
	if cap(p.first) < n {
		p.first, p.last = make([]int, n), make([]int, n)
	}
	p.first, p.last = p.first[:n], p.last[:n]
	parallel(workers, n, func(_, lo, hi int) {
		for pl := lo; pl < hi; pl++ {
			f, l := inner, -1
			rlo, rhi := sp.lo[pl*inner:][:inner], sp.hi[pl*inner:][:inner]
			for r := range rlo {
				if rlo[r] <= rhi[r] {
					f = r
					break
				}
			}
			for r := inner - 1; r > f; r-- {
				if rlo[r] <= rhi[r] {
					l = r
					break
				}
			}
			p.first[pl], p.last[pl] = f, max(l, f)
		}
	})
}

// work holds the work arrays of an evaluation, kept from one subset to
// the next so that each is allocated, and its memory first touched, once.
type work struct {
	x         [][]float64
	r         []float64
	need      []*spans
	sup0, sup []*spans
}

// take sets s.x, s.r, s.need, s.sup0 and s.sup to arrays of w of at
// least xsize, rsize, k+2, k+1 and k+2 entries, allocating those that are
// too short. When the arrays kept and the longer ones would take more
// than s's budget, w lets go of its arrays first.
func (w *work) take(s *subset, xsize, rsize int) {
	m := s.k + 1
	total := 8 * float64(max(cap(w.r), rsize))
	for i := 0; i < max(m, len(w.x)); i++ {
		n := 0
		if i < len(w.x) {
			n = cap(w.x[i])
		}
		if i < m {
			n = max(n, xsize)
		}
		total += 8 * float64(n)
	}
	for _, list := range [][]*spans{w.need, w.sup0, w.sup} {
		for _, sp := range list {
			total += 16 * float64(cap(sp.lo))
		}
	}
	if total > float64(s.budget) {
		*w = work{}
	}
	for len(w.x) < m {
		w.x = append(w.x, nil)
	}
	for i := range m {
		if cap(w.x[i]) < xsize {
			w.x[i] = make([]float64, xsize)
		}
	}
	if cap(w.r) < rsize {
		w.r = make([]float64, rsize)
	}
	for len(w.need) < s.k+2 {
		w.need = append(w.need, new(spans))
	}
	for len(w.sup0) < m {
		w.sup0 = append(w.sup0, new(spans))
	}
	for len(w.sup) < s.k+2 {
		w.sup = append(w.sup, new(spans))
	}
	s.x, s.r, s.need = w.x[:m], w.r[:rsize], w.need[:s.k+2]
	s.sup0, s.sup = w.sup0[:m], w.sup[:s.k+2]
}

// pad is the number of unused values that padded leaves on each side of
// a slice: at least 128 bytes, two cache lines.
const pad = 16

// padded returns a slice of n zero values with pad unused values on each
// side, so that the slices that different goroutines write often never
// share a cache line (each write would take the line from the other
// cores).
func padded[T any](n int) []T {
	return make([]T, n+2*pad)[pad : pad+n : pad+n]
}

// scratch is one goroutine's work space; its slices are padded.
type scratch struct {
	r        []int
	p        []float64
	tmp      []float64
	idx, aux []int
	x        [][]float64 // a row of each member's X
}

func newSubset(l *tables.Layout, rule tables.Rule, q tables.Set, d, workers int, maxBytes int64) (*subset, error) {
	mem := q.Members()
	m := len(mem)
	k := m - 1
	if d > maxSpan/k {
		return nil, fmt.Errorf("fast: gap bound %d is too large for %d channels", d, m)
	}
	s := &subset{l: l, rule: rule, mem: mem, k: k, d: d, span: k * d, workers: workers, budget: maxBytes}
	for _, c := range mem {
		s.lo = append(s.lo, l.Lo[c])
		s.w = append(s.w, l.Hi[c]-l.Lo[c])
		s.p = append(s.p, l.P[c])
	}
	// Start with one tile covering the box [-span, span]^k and halve the
	// longest side until the work arrays fit the budget.
	s.planes = make([]planes, k)
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
		sc.r = padded[int](n)
		for c := range sc.r {
			sc.r[c] = tables.Far
		}
		sc.r[mem[0]] = 0
		sc.p = padded[float64](n)
		sc.tmp = padded[float64](chunk)
		sc.idx = padded[int](k)
		sc.aux = padded[int](k)
		sc.x = padded[[]float64](m)
	}
	for c := 0; c < n; c++ {
		if !q.Has(c) {
			s.far = append(s.far, c)
		}
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
	// Spans: the k+2 stages of need and of sup and the k+1 members of
	// sup0, each at most xs / (last extent) rows of 16 bytes.
	spans := float64(3*s.k+5) * 16 * xs / float64(s.xext(s.tile, s.k-1))
	per := float64(len(s.l.Lo))*16 + float64(s.k)*16 + chunk*8
	return 8*(float64(s.k+1)*xs+rs) + spans + float64(s.workers)*per
}

// run evaluates every tile and reports the configurations in it.
func (s *subset) run(fn func(v []int, regret float64)) error {
	v := s.farVector()
	return s.tiles(func(ulo, ext []int, cfg *spans) {
		s.report(ulo, ext, cfg, v, fn)
	})
}

// scan evaluates every tile, appends the regrets of its configurations to
// regs when keep is true and calls fn for those that pick chooses (see
// Evaluator.Scan), and returns regs. Without keep, at counts the
// configurations from len(regs) all the same.
func (s *subset) scan(regs []float64, keep bool, pick func(at int, regret float64) bool, fn func(at int, v []int, regret float64)) ([]float64, error) {
	v := s.farVector()
	at := len(regs)
	err := s.tiles(func(ulo, ext []int, cfg *spans) {
		var n int
		regs, n = s.collect(regs, at, keep, ulo, ext, cfg, v, pick, fn)
		at += n
	})
	return regs, err
}

// farVector returns a vector of the layout's length at tables.Far.
func (s *subset) farVector() []int {
	v := make([]int, s.l.N())
	for c := range v {
		v[c] = tables.Far
	}
	return v
}

// tiles evaluates every tile and calls done with each that holds
// configurations, its regrets in s.r.
func (s *subset) tiles(done func(ulo, ext []int, cfg *spans)) error {
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
	if s.work == nil {
		s.work = new(work)
	}
	s.work.take(s, xsize, rsize)
	t := make([]int, k)
	ulo := make([]int, k)
	ext := make([]int, k)
	for {
		for a := range t {
			ulo[a] = -s.span + t[a]*s.tile[a]
			ext[a] = min(s.tile[a], s.span-ulo[a]+1)
		}
		cfg, err := s.regrets(ulo, ext)
		if err != nil {
			return err
		}
		if cfg != nil {
			done(ulo, ext, cfg)
		}
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

// setIndex sets idx to the row-major multi-index of flat index i within
// extents ext.
func setIndex(idx, ext []int, i int) {
	for a := len(ext) - 1; a >= 0; a-- {
		idx[a] = i % ext[a]
		i /= ext[a]
	}
}

// dot returns sum idx[a]*stride[a].
func dot(idx, stride []int) int {
	off := 0
	for a, i := range idx {
		off += i * stride[a]
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
//
// An empty row is stored as emptyLo, emptyHi (or these shifted by a few
// steps), so that the hull of several rows is the least lo and the
// greatest hi, empty or not.
type spans struct {
	ext    []int // extents of the axes before the last
	lo, hi []int
}

// The bounds of an empty row of spans: far beyond any index, and far from
// overflowing when shifted by the spread of a noise pmf.
const (
	emptyLo = math.MaxInt / 4
	emptyHi = math.MinInt / 4
)

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
// unspecified) and returns the spans of the configurations, nil if the
// tile holds none.
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
	need := s.need
	var found bool
	need[k+1], found = s.validSpans(need[k+1], ulo, ext)
	if !found {
		return nil, nil
	}
	need[k] = s.diagDilate(need[k], need[k+1])
	for ax := k - 1; ax >= 0; ax-- {
		need[ax] = s.axisDilate(need[ax], need[ax+1], ax)
	}

	planes := s.planes
	for ax := 0; ax < k-1; ax++ {
		planes[ax].find(need[ax+1], ax, s.workers)
	}

	// Values outside the spans keep whatever an earlier channel or tile
	// left there: no needed value reads them.
	nonzero := s.evalRule(xlo, xext, need[0], s.sup0)
	if s.fault.Load() {
		return nil, fmt.Errorf("fast: the rule gives probability to a channel outside subset %v", s.mem)
	}
	rs := s.r[:prod(ext)]
	s.clearSpans(rs, ext[k-1], need[k+1])
	g := make([]region, k+2)
	for i := range s.mem {
		if !nonzero[i] {
			continue
		}
		// Member i adds nothing where it holds the highest value: each
		// stage computes only where that is not the case for some
		// configuration that reads it.
		for st := 1; st <= k+1; st++ {
			s.region(&g[st], i, st, ulo)
		}
		// Where member i's values can be nonzero, stage by stage: the
		// passes compute nothing else.
		sup := make([]*spans, k+2)
		sup[0] = s.sup0[i]
		for ax := 0; ax < k; ax++ {
			s.sup[ax+1] = s.supAxis(s.sup[ax+1], sup[ax], need[ax+1].ext, ax, &planes[ax])
			sup[ax+1] = s.sup[ax+1]
		}
		s.sup[k+1] = s.supDiag(s.sup[k+1], sup[k], need[k+1].ext)
		sup[k+1] = s.sup[k+1]
		a := s.x[i][:size]
		for ax := 0; ax < k; ax++ {
			s.axisPass(a, xst, ax, need[ax+1], &planes[ax], &g[ax+1], s.stageExt(ext, ax+1), sup[ax+1])
		}
		s.diagPass(a, xst, ulo, ext, i, rs, need[k+1], &g[k+1], sup[k+1])
	}
	return need[k+1], nil
}

// clearSpans sets to zero the entries of rs (rows of length last) in the
// spans cfg.
func (s *subset) clearSpans(rs []float64, last int, cfg *spans) {
	parallel(s.workers, len(cfg.lo), func(_, lo, hi int) {
		for row := lo; row < hi; row++ {
			if a, b := cfg.lo[row], cfg.hi[row]; a <= b {
				clear(rs[row*last+a : row*last+b+1])
			}
		}
	})
}

// region is, for one member and one stage of the computation, the set
// of values that the member's terms of the regret can read: those within
// reach, through the passes after the stage, of a configuration where the
// member's weight max(0, u_1, ..., u_k) - u_i is not zero. Those
// configurations form a union of half-spaces (u_j > u_i for some j > 0,
// or u_i < 0; for member 0, u_j > 0 for some j), and a pass reads values
// within the spread of a noise pmf, so at every stage the set is the union
// of the same half-spaces moved by constants. Within a row (every axis but
// the last fixed) it is the whole row or a half-line, which clip
// intersects with the row's span. The needed spans and the region of a
// stage each hold everything that those of the next stage read, so their
// intersection does too.
//
// In the index coordinates x of the stage, with a_j = j-1 the axis of
// member j:
//
//   - member 0: the union over j of x_(a_j) > c[a_j];
//   - member i > 0: the union over j != i, j > 0, of
//     x_(a_j) - x_(a_i) > c[a_j], and x_(a_i) < b.
type region struct {
	i    int   // the member
	last int   // the last axis, k-1
	c    []int // threshold of each axis
	b    int
}

// region sets g to the region of member i at stage st in 1..k+1 (the
// output of axis pass st-1, or of the diagonal pass for st = k+1) of the
// tile with lowest corner ulo.
func (s *subset) region(g *region, i, st int, ulo []int) {
	k := s.k
	hi0 := s.lo[0] + s.w[0]
	// corner returns the value difference of index 0 along axis a.
	corner := func(a int) int {
		switch {
		case st == k+1:
			return ulo[a]
		case a < st:
			return ulo[a] - hi0
		default:
			return ulo[a] + s.lo[a+1] - hi0
		}
	}
	// In value differences z, the passes after stage st move the
	// half-spaces of the configurations: the pass along axis a reads z
	// from z - t e_a, t in [lo, hi] of member a+1, and the diagonal pass
	// reads z from z + t (1, ..., 1), t in [lo_0, hi_0].
	low := func(a int) int { // what a lower bound on z_a gains
		if st <= k && a >= st {
			return s.lo[a+1]
		}
		return 0
	}
	high := func(a int) int { // what an upper bound on z_a gains
		if st <= k && a >= st {
			return s.lo[a+1] + s.w[a+1]
		}
		return 0
	}
	g.i, g.last = i, k-1
	if len(g.c) != k {
		g.c = make([]int, k)
	}
	if i == 0 {
		for a := range g.c {
			c := low(a) // z_a > c
			if st <= k {
				c -= hi0
			}
			g.c[a] = c - corner(a)
		}
		return
	}
	ai := i - 1
	for a := range g.c {
		if a != ai {
			// z_a - z_ai > c
			g.c[a] = low(a) - high(ai) - corner(a) + corner(ai)
		}
	}
	b := high(ai) // z_ai < b
	if st <= k {
		b -= s.lo[0]
	}
	g.b = b - corner(ai)
}

// clip returns the part of the span [lo, hi] of the row idx (the indices
// of the axes before the last) within the region; lo > hi if none.
func (g *region) clip(idx []int, lo, hi int) (int, int) {
	l := g.last
	switch ai := g.i - 1; {
	case g.i == 0:
		for a, x := range idx {
			if x > g.c[a] {
				return lo, hi
			}
		}
		return max(lo, g.c[l]+1), hi
	case ai == l:
		b := g.b
		for a, x := range idx {
			b = max(b, x-g.c[a])
		}
		return lo, min(hi, b-1)
	default:
		xi := idx[ai]
		if xi < g.b {
			return lo, hi
		}
		for a, x := range idx {
			if a != ai && x-xi > g.c[a] {
				return lo, hi
			}
		}
		return max(lo, xi+g.c[l]+1), hi
	}
}

// lastRange returns the values x of the last difference for which
// (0, u..., x) are the value differences of a configuration, where u holds
// the other differences: they form the interval [lo, hi] (empty when
// lo > hi). Sorted, the fixed values f may have at most one gap wider than
// d, which x must split; with none, x may lie anywhere within d of them.
func (s *subset) lastRange(u []int) (lo, hi int) {
	// The m fixed values and x have m sorted gaps of at most d: most rows
	// of a tile fail that on the range of the fixed values alone.
	m := len(u) + 1
	fmin, fmax := 0, 0
	for _, x := range u {
		fmin, fmax = min(fmin, x), max(fmax, x)
	}
	if fmax-fmin > m*s.d {
		return 1, 0
	}
	var f [16]int
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
// the last axis: an interval, by lastRange; and whether there are any.
func (s *subset) validSpans(dst *spans, ulo, ext []int) (*spans, bool) {
	k := s.k
	out := reuse(dst, ext[:k-1])
	last := ext[k-1]
	var found atomic.Bool
	parallel(s.workers, len(out.lo), func(wk, lo, hi int) {
		sc := &s.scratch[wk]
		idx, u := sc.idx[:k-1], sc.aux[:k-1]
		setIndex(idx, out.ext, lo)
		for row := lo; row < hi; row++ {
			if row > lo {
				next(idx, out.ext)
			}
			for a := range u {
				u[a] = ulo[a] + idx[a]
			}
			l, h := s.lastRange(u)
			l, h = max(l-ulo[k-1], 0), min(h-ulo[k-1], last-1)
			if l > h {
				l, h = emptyLo, emptyHi
			} else if !found.Load() {
				found.Store(true)
			}
			out.lo[row], out.hi[row] = l, h
		}
	})
	return out, found.Load()
}

// diagDilate returns the spans of Y that the diagonal pass needs to
// produce the spans out: P at i reads Y at i + t(1, ..., 1), t in
// [0, w_0].
func (s *subset) diagDilate(dst, out *spans) *spans {
	w0 := s.w[0]
	n := len(out.ext)
	ext := make([]int, n)
	for a := range ext {
		ext[a] = out.ext[a] + w0
	}
	in := reuse(dst, ext)
	if n == 0 {
		in.lo[0], in.hi[0] = out.lo[0], out.hi[0]+w0
		return in
	}
	// Row (p, j) of in, p the indices of the axes before the last row
	// axis, is the hull of the rows (p - t·1, j - t) of out shifted by t:
	// for each p and t, a run along the last row axis.
	olen, ilen := out.ext[n-1], ext[n-1]
	ost := strides(out.ext)
	back := 0 // one step back along the diagonal of p, in rows of out
	for a := 0; a < n-1; a++ {
		back += ost[a]
	}
	pext := ext[:n-1]
	parallel(s.workers, prod(pext), func(wk, lo, hi int) {
		sc := &s.scratch[wk]
		p := sc.idx[:n-1]
		setIndex(p, pext, lo)
		for u := lo; u < hi; u++ {
			if u > lo {
				next(p, pext)
			}
			ilo, ihi := in.lo[u*ilen:][:ilen], in.hi[u*ilen:][:ilen]
			for j := range ilo {
				ilo[j], ihi[j] = emptyLo, emptyHi
			}
			t0, t1, base := 0, w0, 0
			for a, x := range p {
				t0 = max(t0, x-out.ext[a]+1)
				t1 = min(t1, x)
				base += x * ost[a]
			}
			for t := t0; t <= t1; t++ {
				r := base - t*back
				olo, ohi := out.lo[r:][:olen], out.hi[r:][:olen]
				dlo, dhi := ilo[t:][:olen], ihi[t:][:olen]
				for j := range dlo {
					dlo[j] = min(dlo[j], olo[j]+t)
					dhi[j] = max(dhi[j], ohi[j]+t)
				}
			}
		}
	})
	return in
}

// The supports: for one member, the spans of the values of each stage
// that can be nonzero. At stage 0 they hold, in every row of the needed
// spans, the first and last reading vector where the rule picks the
// member (evalRule); a pass makes a value nonzero only when it reads a
// nonzero one, so the support of each later stage holds those that read
// the support of the stage before. At most reading vectors the rule's
// choice is certain, so the supports of the members barely overlap, and
// the passes, which compute only within them, do a fraction of the work
// of computing every needed value for every member.
//
// The passes read outside the supports as before, and find zeros there:
// the support of a stage holds, in each row, that of the stage before in
// the same row (the pass reads it at t = 0), so a value outside it is
// outside the supports of every stage before, where stage 0 set it to
// zero and no stage since wrote it.

// supAxis returns the support after the pass along axis ax, rows of
// extents ext, from the support in before it: the output at j reads the
// input at j + t along ax, t in [0, w]. For ax < k-1, pl holds the planes
// of the needed spans of the output.
//
// Where the needed spans of a stage are empty, so may its support be:
// the needed values of the next stage read only needed values of this
// one, and a value outside the support of a stage is then outside those
// of the stages before it wherever it is needed, which is all that the
// zeros of the passes' reads (see above) rest on.
func (s *subset) supAxis(dst, in *spans, ext []int, ax int, pl *planes) *spans {
	w := s.w[ax+1]
	k := s.k
	out := reuse(dst, ext)
	if ax == k-1 {
		parallel(s.workers, (len(out.lo)+dilatePiece-1)/dilatePiece, func(_, lo, hi int) {
			lo, hi = lo*dilatePiece, min(hi*dilatePiece, len(out.lo))
			for r := lo; r < hi; r++ {
				out.lo[r], out.hi[r] = in.lo[r]-w, in.hi[r]
			}
		})
		return out
	}
	// Row (o, j, r) of out, o the indices of the axes before ax and r
	// those after it, is the hull of the rows (o, j+t, r) of in, t in
	// [0, w], where the needed spans of out may not be empty (pl);
	// elsewhere it is empty, which drops nothing that a needed value
	// reads (see supAxis).
	outer, jn, inner := prod(ext[:ax]), ext[ax], prod(ext[ax+1:])
	ijn := in.ext[ax]
	parallel(s.workers, outer*jn, func(_, lo, hi int) {
		for p := lo; p < hi; p++ {
			o, j := p/jn, p%jn
			dlo, dhi := out.lo[p*inner:][:inner], out.hi[p*inner:][:inner]
			f, l := min(pl.first[p], inner), min(pl.last[p], inner-1)
			if f > l {
				f, l = inner, inner-1
			}
			for r := range inner {
				if r < f || r > l {
					dlo[r], dhi[r] = emptyLo, emptyHi
				}
			}
			if f > l {
				continue
			}
			dlo, dhi = dlo[f:l+1], dhi[f:l+1]
			for r := range dlo {
				dlo[r], dhi[r] = emptyLo, emptyHi
			}
			for t := 0; t <= w; t++ {
				row := (o*ijn + j + t) * inner
				slo, shi := in.lo[row+f:][:len(dlo)], in.hi[row+f:][:len(dlo)]
				for r := range dlo {
					dlo[r] = min(dlo[r], slo[r])
					dhi[r] = max(dhi[r], shi[r])
				}
			}
		}
	})
	return out
}

// supDiag returns the support after the diagonal pass, rows of extents
// ext, from the support in before it: the output at position j of row p
// reads the input at position j + t of row p + t (1, ..., 1), t in
// [0, w_0].
func (s *subset) supDiag(dst, in *spans, ext []int) *spans {
	w0 := s.w[0]
	out := reuse(dst, ext)
	n := len(ext)
	if n == 0 {
		out.lo[0], out.hi[0] = in.lo[0]-w0, in.hi[0]
		return out
	}
	ist := strides(in.ext)
	step := 0 // one step along the diagonal of p, in rows of in
	for _, x := range ist {
		step += x
	}
	parallel(s.workers, len(out.lo), func(wk, lo, hi int) {
		p := s.scratch[wk].idx[:n]
		setIndex(p, ext, lo)
		for r := lo; r < hi; r++ {
			if r > lo {
				next(p, ext)
			}
			base := dot(p, ist)
			l, h := emptyLo, emptyHi
			for t := 0; t <= w0; t++ {
				if x := in.lo[base+t*step]; x <= in.hi[base+t*step] {
					l, h = min(l, x-t), max(h, in.hi[base+t*step]-t)
				}
			}
			out.lo[r], out.hi[r] = l, h
		}
	})
	return out
}

// dilatePiece is the length of the runs of rows that axisDilate works on
// at a time.
const dilatePiece = 4096

// axisDilate returns the spans that the pass along axis ax needs to
// produce the spans out: the output at j reads the input at j + t along
// ax, t in [0, w].
func (s *subset) axisDilate(dst, out *spans, ax int) *spans {
	w := s.w[ax+1]
	k := s.k
	if ax == k-1 {
		in := reuse(dst, out.ext)
		parallel(s.workers, (len(out.lo)+dilatePiece-1)/dilatePiece, func(_, lo, hi int) {
			lo, hi = lo*dilatePiece, min(hi*dilatePiece, len(out.lo))
			copy(in.lo[lo:hi], out.lo[lo:hi])
			for r := lo; r < hi; r++ {
				in.hi[r] = out.hi[r] + w
			}
		})
		return in
	}
	ext := append([]int(nil), out.ext...)
	ext[ax] += w
	in := reuse(dst, ext)
	// For every index of the axes before ax, the rows of in form a run
	// of ilen rows, each the hull of the rows t*inner before it in the
	// run of out, t in [0, w].
	inner := prod(ext[ax+1:])
	olen, ilen := out.ext[ax]*inner, ext[ax]*inner
	pieces := (ilen + dilatePiece - 1) / dilatePiece
	parallel(s.workers, prod(ext[:ax])*pieces, func(_, lo, hi int) {
		for u := lo; u < hi; u++ {
			o, x0 := u/pieces, (u%pieces)*dilatePiece
			x1 := min(x0+dilatePiece, ilen)
			ilo, ihi := in.lo[o*ilen:][x0:x1], in.hi[o*ilen:][x0:x1]
			for j := range ilo {
				ilo[j], ihi[j] = emptyLo, emptyHi
			}
			olo, ohi := out.lo[o*olen:][:olen], out.hi[o*olen:][:olen]
			for t := 0; t <= w; t++ {
				sh := t * inner
				a, b := max(x0, sh), min(x1, sh+olen)
				if a >= b {
					continue
				}
				dlo, dhi := ilo[a-x0:b-x0], ihi[a-x0:b-x0]
				slo, shi := olo[a-sh:b-sh], ohi[a-sh:b-sh]
				for j := range dlo {
					dlo[j] = min(dlo[j], slo[j])
					dhi[j] = max(dhi[j], shi[j])
				}
			}
		}
	})
	return in
}

// evalRule sets s.x[i], over the spans need of the box of reading
// differences with lowest corner xlo and extents xext, to the probability
// that the rule picks member i, sets sup[i] to its support at stage 0
// (see supAxis), and reports for each member whether any of these
// probabilities is not zero.
//
// (Tried and not kept: remembering, between evaluations of one table
// rule whose tables only gain cells, the cell or forced choice of every
// reading vector, so that a later evaluation reads the probabilities
// without finding the top group, the alive channels and the cell again.
// Five channels with 5-point pmfs: the same rounds at the same speed,
// about 9.5 s per evaluation, and 2.3 GB more memory: reading a cell's
// probabilities, scattered in memory, costs about what finding it did.)
func (s *subset) evalRule(xlo, xext []int, need *spans, sup []*spans) []bool {
	k := s.k
	last := xext[k-1]
	for i := range sup {
		sup[i] = reuse(sup[i], need.ext)
	}
	nonzero := make([]uint32, s.workers) // bit i for member i
	rowRule, _ := s.rule.(tables.RowRule)
	parallel(s.workers, len(need.lo), func(w, lo, hi int) {
		sc := &s.scratch[w]
		r, p, xr := sc.r, sc.p, sc.x
		var nz uint32
		idx := sc.idx[:k-1]
		setIndex(idx, need.ext, lo)
		for row := lo; row < hi; row++ {
			if row > lo {
				next(idx, need.ext)
			}
			jlo, jhi := need.lo[row], need.hi[row]
			if jlo > jhi {
				for _, sp := range sup {
					sp.lo[row], sp.hi[row] = emptyLo, emptyHi
				}
				continue
			}
			for a, x := range idx {
				r[s.mem[a+1]] = xlo[a] + x
			}
			base := row * last
			for i := range xr {
				xr[i] = s.x[i][base+jlo : base+jhi+1]
			}
			if rowRule != nil {
				r[s.mem[k]] = xlo[k-1] + jlo
				rowRule.ProbsRow(r, s.mem[k], s.mem, xr)
			} else {
				for j := jlo; j <= jhi; j++ {
					r[s.mem[k]] = xlo[k-1] + j
					s.rule.Probs(r, p)
					for i, c := range s.mem {
						xr[i][j-jlo] = p[c]
					}
					for _, c := range s.far {
						if p[c] != 0 {
							s.fault.Store(true)
						}
					}
				}
			}
			// The support: the first and last nonzero value of each
			// member.
			for i, x := range xr {
				f := slices.IndexFunc(x, func(v float64) bool { return v != 0 })
				if f < 0 {
					sup[i].lo[row], sup[i].hi[row] = emptyLo, emptyHi
					continue
				}
				l := len(x) - 1
				for x[l] == 0 {
					l--
				}
				sup[i].lo[row], sup[i].hi[row] = jlo+f, jlo+l
				nz |= 1 << uint(i)
			}
		}
		nonzero[w] |= nz
	})
	out := make([]bool, k+1)
	for i := range out {
		for _, nz := range nonzero {
			out[i] = out[i] || nz&(1<<uint(i)) != 0
		}
	}
	return out
}

// axisPass replaces a by its correlation along axis ax with the noise
// pmf of member ax+1, over the spans out of the output (whose extents are
// outExt) within the region g and the output's support sup:
// out[.., j, ..] = sum_t p[t] in[.., j+t, ..], with t in increasing order.
// The result stays at the low indices, in place.
func (s *subset) axisPass(a []float64, st []int, ax int, out *spans, pl *planes, g *region, outExt []int, sup *spans) {
	k := s.k
	pa := s.p[ax+1]
	if ax == k-1 {
		parallel(s.workers, len(out.lo), func(wk, lo, hi int) {
			idx := s.scratch[wk].idx[:k-1]
			setIndex(idx, out.ext, lo)
			for row := lo; row < hi; row++ {
				if row > lo {
					next(idx, out.ext)
				}
				if out.lo[row] > out.hi[row] {
					continue
				}
				jlo, jhi := g.clip(idx, max(out.lo[row], sup.lo[row]), min(out.hi[row], sup.hi[row]))
				if jlo <= jhi {
					correlate(a[dot(idx, st):], pa, jlo, jhi)
				}
			}
		})
		return
	}
	// The rows of out are (o, j, r): o the indices of the axes before
	// ax, j the index along ax and r those of the axes after ax. A unit is
	// a block of r for one o, and a chunk of the last axis; it runs j
	// upwards, so that a row is replaced after the rows before it along ax
	// have read it, and over the block within each j, so that the spans
	// and the rows of a are read in order.
	outer, jn, inner := prod(out.ext[:ax]), out.ext[ax], prod(out.ext[ax+1:])
	blocks := (inner + passBlock - 1) / passBlock
	lastLen := outExt[k-1]
	nchunk := (lastLen + chunk - 1) / chunk
	sa := st[ax]
	parallel(s.workers, outer*blocks*nchunk, func(wk, lo, hi int) {
		idx := s.scratch[wk].idx[:k-1]
		for u := lo; u < hi; u++ {
			e0 := (u % nchunk) * chunk
			e1 := min(e0+chunk, lastLen)
			o, r0 := u/nchunk/blocks, (u/nchunk%blocks)*passBlock
			r1 := min(r0+passBlock, inner)
			setIndex(idx[:ax], out.ext[:ax], o)
			for j := 0; j < jn; j++ {
				// The rows of the block that may not be empty.
				b0, b1 := max(r0, pl.first[o*jn+j]), min(r1, pl.last[o*jn+j]+1)
				if b0 >= b1 {
					continue
				}
				idx[ax] = j
				setIndex(idx[ax+1:], out.ext[ax+1:], b0)
				row := (o*jn+j)*inner + b0
				for r := b0; r < b1; r, row = r+1, row+1 {
					if r > b0 {
						next(idx[ax+1:], out.ext[ax+1:])
					}
					if out.lo[row] > out.hi[row] {
						continue
					}
					jlo, jhi := g.clip(idx, max(out.lo[row], sup.lo[row]), min(out.hi[row], sup.hi[row]))
					a0, a1 := max(jlo, e0), min(jhi+1, e1)
					if a0 >= a1 {
						continue
					}
					// In place: row j is read first, for t = 0.
					line := a[dot(idx, st)+a0:]
					rows(line[:a1-a0], line, sa, pa)
				}
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
// four terms of p at a time. tmp may be src[:len(tmp)]: each of its
// entries is read before it is written.
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
// out) within the region g, (max u - u_i) P_i(u), where
// P_i(u) = sum_t p_0[t] Y_i(u - (lo_0+t)·1) and a holds Y_i with its lowest
// corner at u_lo - hi_0·1: the pass along the diagonal for the noise of
// member 0. It skips the configurations outside the support sup of P_i.
func (s *subset) diagPass(a []float64, st, ulo, ext []int, i int, rs []float64, out *spans, g *region, sup *spans) {
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
		idx := sc.idx[:k-1]
		row, c := lo/nchunk, lo%nchunk
		setIndex(idx, out.ext, row)
		for u := lo; u < hi; u++ {
			if u > lo {
				if c++; c == nchunk {
					c = 0
					row++
					next(idx, out.ext)
				}
			}
			if out.lo[row] > out.hi[row] {
				continue
			}
			jlo, jhi := g.clip(idx, max(out.lo[row], sup.lo[row]), min(out.hi[row], sup.hi[row]))
			e0 := c * chunk
			a0, a1 := max(jlo, e0), min(jhi+1, e0+chunk, lastLen)
			if a0 >= a1 {
				continue
			}
			baseA := dot(idx, st[:k-1])
			baseR := row * lastLen
			// The weight max u - u_i: the part from the axes before the
			// last is fixed along the row.
			mo, ui := 0, 0
			for b, x := range idx {
				ub := ulo[b] + x
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
	idx := make([]int, k-1)
	last := ext[k-1]
	for row := range cfg.lo {
		if row > 0 {
			next(idx, cfg.ext)
		}
		jlo, jhi := cfg.lo[row], cfg.hi[row]
		if jlo > jhi {
			continue
		}
		fixed := s.rowLowest(ulo, idx)
		for j := jlo; j <= jhi; j++ {
			s.config(v, ulo, idx, fixed, j)
			fn(v, s.r[row*last+j])
		}
	}
}

// rowLowest returns the lowest of u_0 = 0 and the value differences
// fixed along the row idx of a tile with lowest corner ulo.
func (s *subset) rowLowest(ulo, idx []int) int {
	fixed := 0
	for a, x := range idx {
		fixed = min(fixed, ulo[a]+x)
	}
	return fixed
}

// config sets v to the configuration at index j of row idx of a tile
// with lowest corner ulo (fixed from rowLowest): its values, lowest 0, in
// the members' places.
func (s *subset) config(v, ulo, idx []int, fixed, j int) {
	k := s.k
	ul := ulo[k-1] + j
	lowest := min(fixed, ul)
	v[s.mem[0]] = -lowest
	for a, x := range idx {
		v[s.mem[a+1]] = ulo[a] + x - lowest
	}
	v[s.mem[k]] = ul - lowest
}

// collect reports the configurations of a tile (the spans cfg), in the
// order of report, numbered from base: it appends their regrets to regs
// when keep is true (base is then len(regs)), and calls fn, in that order,
// for those that pick chooses. The regrets are copied and pick is called
// from s.workers goroutines; fn from the calling one. It returns regs and
// the number of configurations.
func (s *subset) collect(regs []float64, base int, keep bool, ulo, ext []int, cfg *spans, v []int, pick func(at int, regret float64) bool, fn func(at int, v []int, regret float64)) ([]float64, int) {
	k := s.k
	last := ext[k-1]
	nrows := len(cfg.lo)
	off := make([]int, nrows+1) // the first configuration of each row, in the tile
	for row := range nrows {
		off[row+1] = off[row] + max(0, cfg.hi[row]-cfg.lo[row]+1)
	}
	if keep {
		regs = slices.Grow(regs, off[nrows])[:base+off[nrows]]
	}
	picked := make([]bool, nrows)
	parallel(s.workers, nrows, func(_, lo, hi int) {
		for row := lo; row < hi; row++ {
			jlo, jhi := cfg.lo[row], cfg.hi[row]
			if jlo > jhi {
				continue
			}
			src := s.r[row*last+jlo : row*last+jhi+1]
			at := base + off[row]
			if keep {
				copy(regs[at:at+len(src)], src)
			}
			for e, x := range src {
				if pick(at+e, x) {
					picked[row] = true
					break
				}
			}
		}
	})
	idx := make([]int, k-1)
	for row := range nrows {
		if row > 0 {
			next(idx, cfg.ext)
		}
		if !picked[row] {
			continue
		}
		fixed := s.rowLowest(ulo, idx)
		jlo := cfg.lo[row]
		for j := jlo; j <= cfg.hi[row]; j++ {
			at := base + off[row] + j - jlo
			if x := s.r[row*last+j]; pick(at, x) {
				s.config(v, ulo, idx, fixed, j)
				fn(at, v, x)
			}
		}
	}
	return regs, off[nrows]
}

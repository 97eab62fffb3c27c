// Package tables holds selection rules for picking one of n noisy channels:
// the optimal minimax-regret rule as a family of decision tables (one per
// group of channels), the greedy rule, the offset rule, and an exact
// evaluator of any rule's worst-case regret.
//
// Everything here works in lattice steps: readings, values and noise offsets
// are integers. Callers convert to reading units by multiplying by the step.
package tables

import (
	"fmt"
	"math/bits"
	"sort"

	"github.com/pickwise/pickwise/discretize"
)

// Far is the reading, in steps, given to channels that are far below every
// other channel: channels outside the subset of a configuration. It is low
// enough that no arithmetic on readings overflows and no gap test joins it
// to a group.
const Far = -(1 << 40)

// Layout is the lattice geometry of a model that every part of pickwise
// agrees on (design notes, "Why the exact problem is a finite linear
// program"): the noise ranges of the channels and the global distances G,
// S, T and D, all in steps.
type Layout struct {
	Lo, Hi []int // noise range of each channel, in steps
	P      [][]float64
	// G is the largest w_k + w_j over distinct channels k, j, where w is a
	// channel's noise spread Hi - Lo.
	G int
	// S is the largest Hi_k - Lo_j over all channels k, j, at least 0.
	S int
	// T = G + S is the largest gap between consecutive sorted readings
	// that still joins two channels into one group.
	T int
	// D = G + 2S is the largest gap between consecutive sorted values of a
	// configuration.
	D int
}

// NewLayout returns the layout of a discretized model.
func NewLayout(m *discretize.Model) (*Layout, error) {
	n := len(m.Channels)
	if n < 2 {
		return nil, fmt.Errorf("tables: need at least two channels, got %d", n)
	}
	if n > 16 {
		return nil, fmt.Errorf("tables: at most 16 channels are supported, got %d", n)
	}
	l := &Layout{Lo: make([]int, n), Hi: make([]int, n), P: make([][]float64, n)}
	for i, c := range m.Channels {
		if err := c.PMF.Check(); err != nil {
			return nil, fmt.Errorf("channel %q: %w", c.Name, err)
		}
		l.Lo[i], l.Hi[i] = c.PMF.Lo, c.PMF.Hi()
		l.P[i] = c.PMF.Probs()
	}
	for k := 0; k < n; k++ {
		for j := 0; j < n; j++ {
			if k != j {
				if g := l.Hi[k] - l.Lo[k] + l.Hi[j] - l.Lo[j]; g > l.G {
					l.G = g
				}
			}
			if s := l.Hi[k] - l.Lo[j]; s > l.S {
				l.S = s
			}
		}
	}
	l.T = l.G + l.S
	l.D = l.G + 2*l.S
	return l, nil
}

// N returns the number of channels.
func (l *Layout) N() int { return len(l.Lo) }

// Widen raises the grouping distance T, and with it D, by k >= 0 steps. A
// larger T lets the tables use the readings of more channels below the top
// group: the rule class grows, so the optimum can only fall (towards the
// unrestricted optimum), and the LP grows with it.
func (l *Layout) Widen(k int) error {
	if k < 0 {
		return fmt.Errorf("tables: cannot widen the grouping distance by %d steps", k)
	}
	l.T += k
	l.D += k
	return nil
}

// Reach returns how many steps T exceeds its least value G + S.
func (l *Layout) Reach() int { return l.T - l.G - l.S }

// Below reports whether channel k is certainly below channel j given their
// readings rk and rj: every pair of values consistent with the readings has
// v_k < v_j.
func (l *Layout) Below(k, j, rk, rj int) bool {
	return rk-rj < l.Lo[k]-l.Hi[j]
}

// Set is a set of channels as a bit mask: channel i is in the set when bit i
// is set.
type Set uint32

// Has reports whether channel i is in s.
func (s Set) Has(i int) bool { return s&(1<<uint(i)) != 0 }

// Len returns the number of channels in s.
func (s Set) Len() int { return bits.OnesCount32(uint32(s)) }

// Members returns the channels of s in increasing order.
func (s Set) Members() []int {
	out := make([]int, 0, s.Len())
	for i := 0; s>>uint(i) != 0; i++ {
		if s.Has(i) {
			out = append(out, i)
		}
	}
	return out
}

// SetOf returns the set holding the given channels.
func SetOf(ch ...int) Set {
	var s Set
	for _, i := range ch {
		s |= 1 << uint(i)
	}
	return s
}

// TopGroup returns the top group of a reading vector: the channels joined to
// the highest reading by consecutive gaps (of the sorted readings) of at
// most T. Readings at Far never join.
func (l *Layout) TopGroup(r []int) Set {
	// The group is every reading at or above the first gap of more than
	// T below the highest: grow it from the highest reading, adding the
	// readings within T of its lowest, until none is.
	top := 0
	for i, x := range r {
		if x > r[top] {
			top = i
		}
	}
	s := SetOf(top)
	low := r[top]
	for {
		next := low
		for i, x := range r {
			if x >= low-l.T && x > Far/2 && !s.Has(i) {
				s |= 1 << uint(i)
				next = min(next, x)
			}
		}
		if next == low {
			return s
		}
		low = next
	}
}

// Alive returns the channels of group a that are not certainly below another
// channel of a, given readings r.
func (l *Layout) Alive(a Set, r []int) Set {
	// Channel k is certainly below j when r_k - lo_k < r_j - hi_j (see
	// Below), so it is alive when r_k - lo_k is at least the largest
	// r_j - hi_j over a (j = k never puts k below: hi_k >= lo_k).
	var ceil int
	first := true
	for rest := a; rest != 0; rest &= rest - 1 {
		j := bits.TrailingZeros32(uint32(rest))
		if x := r[j] - l.Hi[j]; first || x > ceil {
			ceil, first = x, false
		}
	}
	var out Set
	for rest := a; rest != 0; rest &= rest - 1 {
		k := bits.TrailingZeros32(uint32(rest))
		if r[k]-l.Lo[k] >= ceil {
			out |= 1 << uint(k)
		}
	}
	return out
}

// SubsetOf returns the subset of a configuration or reading vector: the
// channels whose entries are not at Far.
func SubsetOf(v []int) Set {
	var q Set
	for i, x := range v {
		if x > Far/2 {
			q |= 1 << uint(i)
		}
	}
	return q
}

// Subsets returns every subset of the n channels with at least two members,
// ordered by size and then by mask, so that output is deterministic.
func Subsets(n int) []Set {
	var out []Set
	for s := Set(1); s < 1<<uint(n); s++ {
		if s.Len() >= 2 {
			out = append(out, s)
		}
	}
	sort.Slice(out, func(i, j int) bool {
		if a, b := out[i].Len(), out[j].Len(); a != b {
			return a < b
		}
		return out[i] < out[j]
	})
	return out
}

// Configurations calls fn for every configuration of subset q with maximum
// consecutive gap d: every value vector on q with minimum 0 whose sorted
// consecutive gaps are all at most d. The vector v has length n; channels
// outside q hold Far. fn must not keep v. Enumeration order is
// deterministic. It stops early when fn returns false.
func Configurations(n int, q Set, d int, fn func(v []int) bool) {
	mem := q.Members()
	m := len(mem)
	v := make([]int, n)
	for i := range v {
		v[i] = Far
	}
	// Enumerate values of the members in [0, (m-1)d] as an odometer and
	// keep the vectors with minimum 0 and gaps at most d. The sorted gaps
	// test prunes nothing, so bound the work by enumerating the sorted
	// profile first: choose sorted values u_0=0 <= u_1 <= ... with gaps
	// <= d, then every distinct assignment of them to the members.
	u := make([]int, m)
	perm := make([]int, m)
	var rec func(i int) bool
	rec = func(i int) bool {
		if i == m {
			return assignments(u, perm, func(p []int) bool {
				for k, c := range mem {
					v[c] = u[p[k]]
				}
				return fn(v)
			})
		}
		for g := 0; g <= d; g++ {
			u[i] = u[i-1] + g
			if !rec(i + 1) {
				return false
			}
		}
		return true
	}
	u[0] = 0
	rec(1)
}

// assignments calls fn with every distinct permutation p of the indices of
// the sorted multiset u, in lexicographic order of the assigned values, so
// that member k gets u[p[k]]. Equal values are not permuted among
// themselves.
func assignments(u []int, p []int, fn func(p []int) bool) bool {
	m := len(u)
	// Work on value ranks: permute a multiset of indices where equal values
	// share the index of their first occurrence.
	idx := make([]int, m)
	for i := range u {
		idx[i] = i
		if i > 0 && u[i] == u[i-1] {
			idx[i] = idx[i-1]
		}
	}
	copy(p, idx)
	for {
		if !fn(p) {
			return false
		}
		// Next lexicographic permutation of p.
		i := m - 2
		for i >= 0 && p[i] >= p[i+1] {
			i--
		}
		if i < 0 {
			return true
		}
		j := m - 1
		for p[j] <= p[i] {
			j--
		}
		p[i], p[j] = p[j], p[i]
		for a, b := i+1, m-1; a < b; a, b = a+1, b-1 {
			p[a], p[b] = p[b], p[a]
		}
	}
}

// Outcomes calls fn for every joint noise outcome of the channels in q: a
// holds the offsets (in steps; entries outside q are 0) and prob its
// probability. fn must not keep a.
func (l *Layout) Outcomes(q Set, fn func(a []int, prob float64)) {
	mem := q.Members()
	n := l.N()
	a := make([]int, n)
	var rec func(i int, prob float64)
	rec = func(i int, prob float64) {
		if i == len(mem) {
			fn(a, prob)
			return
		}
		c := mem[i]
		for k, p := range l.P[c] {
			a[c] = l.Lo[c] + k
			rec(i+1, prob*p)
		}
	}
	rec(0, 1)
}

// Differences is the joint pmf of the noise differences a_k - a_first of
// the channels of a subset, first being its lowest-numbered member. The
// readings of a configuration v, up to a common shift, are v + E for E
// drawn from it: everything a translation-invariant rule does depends on
// the readings only through these differences, so summing over this pmf
// replaces the sum over all joint noise outcomes.
type Differences struct {
	Set Set
	// E holds n offsets (in steps) per point, row-major: entries outside
	// Set and the first member's are 0.
	E    []int
	Prob []float64
}

// Len returns the number of points of d.
func (d *Differences) Len() int { return len(d.Prob) }

// Point returns the offsets of point k (n entries; callers must not
// modify them).
func (d *Differences) Point(k int) []int {
	n := len(d.E) / max(len(d.Prob), 1)
	return d.E[k*n : (k+1)*n]
}

// Differences returns the joint pmf of the noise differences of subset q
// (see the type), its points in increasing lexicographic order of the
// differences and without zero-probability points. Building it costs one
// pass over the joint noise outcomes; it has at most the product over the
// members but the first of (w_first + w_k + 1) points.
func (l *Layout) Differences(q Set) *Differences {
	mem := q.Members()
	n := l.N()
	f := mem[0]
	rest := mem[1:]
	ext := make([]int, len(rest))
	stride := make([]int, len(rest))
	size := 1
	for k := len(rest) - 1; k >= 0; k-- {
		c := rest[k]
		ext[k] = l.Hi[c] - l.Lo[c] + l.Hi[f] - l.Lo[f] + 1
		stride[k] = size
		size *= ext[k]
	}
	acc := make([]float64, size)
	// Index of e_k = a_k - a_f: (a_k - Lo_k) + (Hi_f - a_f).
	var rec func(k, base int, prob float64, af int)
	rec = func(k, base int, prob float64, af int) {
		if k == len(rest) {
			acc[base] += prob
			return
		}
		c := rest[k]
		for j, p := range l.P[c] {
			if p != 0 {
				rec(k+1, base+(j+l.Hi[f]-af)*stride[k], prob*p, af)
			}
		}
	}
	for j, p := range l.P[f] {
		if p != 0 {
			rec(0, 0, p, l.Lo[f]+j)
		}
	}
	d := &Differences{Set: q}
	e := make([]int, n)
	for i, p := range acc {
		if p == 0 {
			continue
		}
		for k, c := range rest {
			e[c] = (i/stride[k])%ext[k] - (l.Hi[f] - l.Lo[c])
		}
		d.E = append(d.E, e...)
		d.Prob = append(d.Prob, p)
	}
	return d
}

// Package exact computes certificates for pickwise's results in exact
// integer arithmetic: the worst-case regret of a table whose probabilities
// are dyadic rationals (an upper bound on the optimum) and the Bayes risk of
// a prior over configurations (a lower bound on every rule's worst case).
//
// Lattice probabilities are multiples of 2^-52 (discretize.DenomBits), so a
// joint outcome of m channels has probability N / 2^(52m) with N an
// integer; rule probabilities are integers over a denominator of the
// rule's own. Every sum is an integer over a known power of two times that
// denominator, and results are returned as big.Rat.
package exact

import (
	"fmt"
	"math"
	"math/big"
	"math/bits"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables"
)

// Rule is a rule whose probabilities are exact rationals with a common
// denominator.
type Rule interface {
	// Den returns the common denominator of the rule's probabilities.
	Den() uint64
	// Nums writes, for readings r (steps, tables.Far for absent channels),
	// the numerator of the probability of each channel; they sum to Den.
	Nums(r []int, q []uint64)
}

// lcm1n returns the least common multiple of 1..n.
func lcm1n(n int) uint64 {
	l := uint64(1)
	for k := uint64(2); k <= uint64(n); k++ {
		a, b := l, k
		for b != 0 {
			a, b = b, a%b
		}
		l = l / a * k
	}
	return l
}

// shareRule is greedy or the offset rule, with ties shared over a
// denominator of lcm(1..n).
type shareRule struct {
	half []int // nil for greedy
	den  uint64
}

// Greedy returns the greedy rule of n channels in exact form.
func Greedy(n int) Rule { return shareRule{den: lcm1n(n)} }

// Offset returns the offset rule with offsets in half steps in exact form.
func Offset(half []int) Rule { return shareRule{half: half, den: lcm1n(len(half))} }

func (s shareRule) Den() uint64 { return s.den }

func (s shareRule) Nums(r []int, q []uint64) {
	ShareNums(tables.Fallback(1<<uint(len(r))-1, r, s.half), s.den, q)
}

// Table is a table rule whose probabilities are exact fractions q/Denom
// with integer q: the probabilities of O, read as multiples of 1/Denom.
// Readings without a cell share a tie of tables.Fallback equally, as O
// does: Den is Denom times lcm(1..n), n the number of channels, so that
// every share is an integer (see NewTableFixed for the exception).
type Table struct {
	O     *tables.Optimal
	Denom uint64
	// mult is Den / Denom: lcm(1..n), or 1 for a fixed-point table.
	mult uint64
	// near reports that every float probability of O is within 1e-15 of
	// its numerator over Den, so that O itself can stand for the table
	// in float evaluations.
	near bool
}

// ShareNums sets the numerators q, over den, of a tie among the channels
// of tied: den/c each, c the number of channels tied, and one more to
// each of the den mod c lowest-numbered of them; zero to every other
// channel. When c divides den the shares are equal.
func ShareNums(tied tables.Set, den uint64, q []uint64) {
	c := uint64(tied.Len())
	share, rem := den/c, den%c
	for i := range q {
		q[i] = 0
		if tied.Has(i) {
			q[i] = share
			if rem > 0 {
				q[i]++
				rem--
			}
		}
	}
}

// NewTable checks that every probability of o is a non-negative multiple of
// 2^-bits, zero outside the alive set, and that each cell sums to exactly 1.
func NewTable(o *tables.Optimal, bits uint) (*Table, error) {
	if bits > 52 {
		return nil, fmt.Errorf("exact: %d bits of probability is too many (at most 52)", bits)
	}
	return newTable(o, uint64(1)<<bits, true, false)
}

// NewTableFixed is NewTable for the rule of a fixed-point chooser, which
// draws one number of the given bits for every choice (see package cgen): a
// tie at readings without a cell shares the 2^bits values of the draw by
// ShareNums, equally only when the number of channels tied divides 2^bits.
// Den is then 2^bits.
func NewTableFixed(o *tables.Optimal, bits uint) (*Table, error) {
	if bits > 52 {
		return nil, fmt.Errorf("exact: %d bits of probability is too many (at most 52)", bits)
	}
	return newTable(o, uint64(1)<<bits, true, true)
}

// NewTableDen reads the probabilities of o as fractions q/den, q the
// integer nearest to p*den, which must lie within 1e-6 of it (plus the
// float64 round-off of q/den, for large den); each cell's
// numerators must be zero outside the alive set and sum to den. Use it for
// tables rounded to a decimal or other non-binary denominator, such as a
// printed procedure's "draw 1 to 100".
func NewTableDen(o *tables.Optimal, den uint64) (*Table, error) {
	if den == 0 || den > 1<<52 {
		return nil, fmt.Errorf("exact: denominator %d out of range [1, 2^52]", den)
	}
	return newTable(o, den, false, false)
}

func newTable(o *tables.Optimal, den uint64, strict, fixed bool) (*Table, error) {
	t := &Table{O: o, Denom: den, mult: 1, near: true}
	if l := lcm1n(o.Layout.N()); !fixed {
		if den > math.MaxUint64/l {
			return nil, fmt.Errorf("exact: denominator %d times lcm(1..%d) = %d, for shared ties, overflows 64 bits", den, o.Layout.N(), l)
		}
		t.mult = l
	} else if den%l != 0 {
		// O shares ties equally; the fixed-point rule does not.
		t.near = false
	}
	for _, tab := range o.Tables {
		for _, c := range tab.Cells {
			var s uint64
			for i, p := range c.P {
				q, ok := t.numerator(p, strict)
				if math.Abs(p-float64(q)/float64(den)) > 1e-15 {
					t.near = false
				}
				if !ok {
					return nil, fmt.Errorf("group %v cell %v: probability %v of channel %d is not a multiple of 1/%d in [0, 1]", tab.Members, c.Diff, p, tab.Members[i], den)
				}
				if q != 0 && !c.Alive.Has(tab.Members[i]) {
					return nil, fmt.Errorf("group %v cell %v: channel %d is certainly below another but has probability %v", tab.Members, c.Diff, tab.Members[i], p)
				}
				s += q
			}
			if s != den {
				return nil, fmt.Errorf("group %v cell %v: probabilities sum to %d/%d, not 1", tab.Members, c.Diff, s, den)
			}
		}
	}
	return t, nil
}

// numerator returns p * Den when that is (strict: exactly; otherwise within
// 1e-6) an integer in [0, Den].
func (t *Table) numerator(p float64, strict bool) (uint64, bool) {
	if !(p >= 0 && p <= 1) {
		return 0, false
	}
	x := p * float64(t.Denom)
	q := math.Round(x)
	if strict && x != q || math.Abs(x-q) > 1e-6+4e-16*float64(t.Denom) {
		return 0, false
	}
	return uint64(q), true
}

// Den implements Rule.
func (t *Table) Den() uint64 { return t.Denom * t.mult }

// Nums implements Rule.
func (t *Table) Nums(r []int, q []uint64) {
	_, alive, tab, c := t.O.Locate(r)
	if tab == nil || c < 0 {
		ShareNums(tables.Fallback(alive, r, t.O.Half), t.Den(), q)
		return
	}
	for i := range q {
		q[i] = 0
	}
	for i, ch := range tab.Members {
		x, _ := t.numerator(tab.Cells[c].P[i], false)
		q[ch] = x * t.mult
	}
}

// Snap returns a copy of o whose probabilities are multiples of 2^-bits:
// each is rounded to the nearest multiple, negatives and entries outside
// the alive set are set to zero, and the largest entry absorbs the residue
// so that every cell sums to exactly 1.
func Snap(o *tables.Optimal, bits uint) *tables.Optimal {
	return remap(o, int64(1)<<bits, func(p float64) int64 { return snapOne(p, bits) })
}

// remap returns a copy of o whose probabilities are integers over den:
// num(p) for each positive probability of an alive channel, zero
// elsewhere, with the largest entry (or the first alive channel, when none
// is positive) absorbing the residue so that every cell sums to den.
func remap(o *tables.Optimal, den int64, num func(p float64) int64) *tables.Optimal {
	out := o.Blank()
	r := make([]int, o.Layout.N())
	for ti, t := range o.Tables {
		dst := out.Tables[ti]
		for _, c := range t.Cells {
			q := make([]int64, len(c.P))
			var s int64
			big := -1
			for i, p := range c.P {
				if !c.Alive.Has(t.Members[i]) || !(p > 0) {
					continue
				}
				q[i] = num(math.Min(p, 1))
				s += q[i]
				if big < 0 || q[i] > q[big] {
					big = i
				}
			}
			if big < 0 {
				for i := range c.P {
					if c.Alive.Has(t.Members[i]) {
						big = i
						break
					}
				}
			}
			q[big] += den - s
			p := make([]float64, len(q))
			for i := range q {
				p[i] = float64(q[i]) / float64(den)
			}
			for i, ch := range t.Members {
				r[ch] = c.Diff[i]
			}
			dst.Add(r, c.Alive, p)
		}
	}
	return out
}

// snapOne returns p rounded to a multiple of 2^-bits, preferring the
// coarsest multiple of 2^-k (k <= bits) within 1e-12 of p, so that a
// probability the LP found as 0.49999999999999994 ships as exactly 1/2.
func snapOne(p float64, bits uint) int64 {
	for k := uint(0); k < bits; k++ {
		x := math.Round(math.Ldexp(p, int(k)))
		if math.Abs(math.Ldexp(x, -int(k))-p) <= 1e-12 {
			return int64(x) << (bits - k)
		}
	}
	return int64(math.Round(math.Ldexp(p, int(bits))))
}

// Worst is an exact worst case.
type Worst struct {
	Regret *big.Rat // in steps
	Values []int    // the configuration reaching it (tables.Far outside Subset)
	Subset tables.Set
}

// nums returns the exact lattice numerators of each channel of l.
func nums(l *tables.Layout) [][]uint64 {
	out := make([][]uint64, l.N())
	for i, p := range l.P {
		out[i] = make([]uint64, len(p))
		for k, x := range p {
			out[i][k] = uint64(math.Ldexp(x, discretize.DenomBits))
		}
	}
	return out
}

// acc192 is an unsigned 192-bit accumulator.
type acc192 [3]uint64

func (a *acc192) addMul(x, y uint64) {
	hi, lo := bits.Mul64(x, y)
	var c uint64
	a[0], c = bits.Add64(a[0], lo, 0)
	a[1], c = bits.Add64(a[1], hi, c)
	a[2] += c
}

// addMul128 adds x * (yhi*2^64 + ylo).
func (a *acc192) addMul128(x, yhi, ylo uint64) {
	h1, l1 := bits.Mul64(x, ylo)
	h2, l2 := bits.Mul64(x, yhi)
	var c uint64
	a[0], c = bits.Add64(a[0], l1, 0)
	a[1], c = bits.Add64(a[1], h1, c)
	a[2] += h2 + c
	a[1], c = bits.Add64(a[1], l2, 0)
	a[2] += c
}

func (a *acc192) big(z *big.Int) *big.Int {
	z.SetUint64(a[2])
	z.Lsh(z, 64)
	z.Or(z, new(big.Int).SetUint64(a[1]))
	z.Lsh(z, 64)
	return z.Or(z, new(big.Int).SetUint64(a[0]))
}

// innerNum returns sum over the members c of q_c (top - v_c), in 128 bits:
// the regret numerator of one reading vector whose rule numerators are q.
func innerNum(mem []int, q []uint64, v []int, top int) (hi, lo uint64) {
	for _, c := range mem {
		if q[c] != 0 && top != v[c] {
			h, l := bits.Mul64(q[c], uint64(top-v[c]))
			var cy uint64
			lo, cy = bits.Add64(lo, l, 0)
			hi += h + cy
		}
	}
	return hi, lo
}

// regretNum returns the integer N with regret(v) = N / (2^(52m) * den), m
// the size of v's subset.
func regretNum(l *tables.Layout, num [][]uint64, rule Rule, v []int, mem []int, out *big.Int) {
	n := l.N()
	top := tables.Far
	for _, c := range mem {
		if v[c] > top {
			top = v[c]
		}
	}
	r := make([]int, n)
	copy(r, v)
	q := make([]uint64, n)
	m := len(mem)
	last := mem[m-1]
	tmp := new(big.Int)
	out.SetInt64(0)
	prefixes := make([]*big.Int, m)
	for i := range prefixes {
		prefixes[i] = new(big.Int)
	}
	prefixes[0].SetInt64(1)
	var rec func(i int)
	rec = func(i int) {
		if i == m-1 {
			var acc acc192
			for k, pk := range num[last] {
				r[last] = v[last] + l.Lo[last] + k
				rule.Nums(r, q)
				if ihi, ilo := innerNum(mem, q, v, top); ihi != 0 || ilo != 0 {
					acc.addMul128(pk, ihi, ilo)
				}
			}
			acc.big(tmp)
			tmp.Mul(tmp, prefixes[i])
			out.Add(out, tmp)
			return
		}
		c := mem[i]
		for k, pk := range num[c] {
			if pk == 0 {
				continue
			}
			r[c] = v[c] + l.Lo[c] + k
			prefixes[i+1].Mul(prefixes[i], tmp.SetUint64(pk))
			rec(i + 1)
		}
	}
	rec(0)
}

// WorstCase returns the exact worst-case regret of rule over every
// configuration with sorted value gaps of at most d steps.
func WorstCase(l *tables.Layout, rule Rule, d int) Worst {
	num := nums(l)
	n := l.N()
	den := new(big.Int).SetUint64(rule.Den())
	type res struct {
		seq int
		val *big.Int // numerator scaled to 2^(52n) * den
		v   []int
		q   tables.Set
	}
	var bests []*res
	tables.EachConfiguration(n, d, func() func(int, tables.Set, []int) {
		best := &res{seq: -1}
		bests = append(bests, best)
		val := new(big.Int)
		return func(seq int, q tables.Set, v []int) {
			mem := q.Members()
			regretNum(l, num, rule, v, mem, val)
			val.Lsh(val, uint(discretize.DenomBits*(n-len(mem))))
			if best.seq < 0 || val.Cmp(best.val) > 0 {
				*best = res{seq, new(big.Int).Set(val), v, q}
			}
		}
	})
	best := res{seq: -1}
	for _, r := range bests {
		if r.seq < 0 {
			continue
		}
		if best.seq < 0 || r.val.Cmp(best.val) > 0 || (r.val.Cmp(best.val) == 0 && r.seq < best.seq) {
			best = *r
		}
	}
	scale := new(big.Int).Lsh(den, uint(discretize.DenomBits*n))
	return Worst{Regret: new(big.Rat).SetFrac(best.val, scale), Values: best.v, Subset: best.q}
}

// Regret returns the exact regret of rule at configuration v (tables.Far
// outside its subset), in steps.
func Regret(l *tables.Layout, rule Rule, v []int) *big.Rat {
	q := tables.SubsetOf(v)
	if q.Len() < 2 {
		return new(big.Rat)
	}
	mem := q.Members()
	val := new(big.Int)
	regretNum(l, nums(l), rule, v, mem, val)
	scale := new(big.Int).Lsh(new(big.Int).SetUint64(rule.Den()), uint(discretize.DenomBits*len(mem)))
	return new(big.Rat).SetFrac(val, scale)
}

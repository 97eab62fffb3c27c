package cgen

import (
	"fmt"
	"math"
	"math/big"
	"sort"

	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/exact"
)

// Bits is the binary precision of the fixed-point tables: every
// probability is a multiple of 2^-Bits and the random number fed to the
// generated chooser has Bits bits.
const Bits = 16

// One is the fixed-point representation of probability 1: 2^Bits.
const One = 1 << Bits

// Fixed is a table rule in 16-bit fixed point: every probability of Table
// is a multiple of 2^-16, zero outside the cell's alive set, and every cell
// sums to exactly 1.
type Fixed struct {
	// Table is the rule; its probabilities are exact multiples of 2^-16.
	Table *tables.Optimal
}

// Quantize rounds the probabilities of o to multiples of 2^-16 cell by
// cell with the largest-remainder method: the exact quota of member i is
// One * p_i / sum(p), each member gets the integer part of its quota, and
// the units still missing to make One go to the members with the largest
// fractional parts, the lower member position first on equal parts. Each
// member's share therefore differs from its quota by less than 2^-16,
// members with probability 0 keep 0, and each cell sums to exactly 1.
//
// It fails when a probability is negative or not finite, when a member
// certainly below another has positive probability, or when a cell has no
// positive probability.
func Quantize(o *tables.Optimal) (*Fixed, error) {
	if o == nil || o.Layout == nil {
		return nil, fmt.Errorf("cgen: no table to quantize")
	}
	out := o.Blank()
	if len(out.Tables) != len(o.Tables) {
		return nil, fmt.Errorf("cgen: table has %d groups, its layout %d", len(o.Tables), len(out.Tables))
	}
	r := make([]int, o.Layout.N())
	for ti, t := range o.Tables {
		dst := out.Tables[ti]
		if dst.Group != t.Group {
			return nil, fmt.Errorf("cgen: group %d of the table is %v, expected %v", ti, t.Members, dst.Members)
		}
		for _, c := range t.Cells {
			q, err := quantizeCell(t, c)
			if err != nil {
				return nil, err
			}
			p := make([]float64, len(q))
			for i, x := range q {
				p[i] = math.Ldexp(float64(x), -Bits)
			}
			for i := range r {
				r[i] = 0
			}
			for i, ch := range t.Members {
				r[ch] = c.Diff[i]
			}
			if dst.Add(r, c.Alive, p) < 0 {
				return nil, fmt.Errorf("cgen: group %v cell %v lies outside the group's range", t.Members, c.Diff)
			}
		}
	}
	return &Fixed{Table: out}, nil
}

// quantizeCell returns the largest-remainder numerators over One of the
// probabilities of cell c of table t.
func quantizeCell(t *tables.Table, c tables.Cell) ([]uint32, error) {
	if len(c.P) != len(t.Members) || len(c.Diff) != len(t.Members) {
		return nil, fmt.Errorf("cgen: group %v cell %v: %d probabilities for %d members", t.Members, c.Diff, len(c.P), len(t.Members))
	}
	sum := new(big.Rat)
	ps := make([]*big.Rat, len(c.P))
	for i, p := range c.P {
		if math.IsNaN(p) || math.IsInf(p, 0) || p < 0 {
			return nil, fmt.Errorf("cgen: group %v cell %v: probability %v of channel %d", t.Members, c.Diff, p, t.Members[i])
		}
		if p > 0 && !c.Alive.Has(t.Members[i]) {
			return nil, fmt.Errorf("cgen: group %v cell %v: channel %d is certainly below another but has probability %v", t.Members, c.Diff, t.Members[i], p)
		}
		ps[i] = new(big.Rat).SetFloat64(p)
		sum.Add(sum, ps[i])
	}
	if sum.Sign() == 0 {
		return nil, fmt.Errorf("cgen: group %v cell %v: no channel has positive probability", t.Members, c.Diff)
	}
	q := make([]uint32, len(c.P))
	rem := make([]*big.Rat, len(c.P))
	one := new(big.Int).SetInt64(One)
	var total int64
	num, quo, m := new(big.Int), new(big.Int), new(big.Int)
	for i, p := range ps {
		// quota = One * p / sum = num / den with num = One*p.num*sum.den
		// and den = p.den*sum.num.
		num.Mul(one, p.Num())
		num.Mul(num, sum.Denom())
		den := new(big.Int).Mul(p.Denom(), sum.Num())
		quo.QuoRem(num, den, m)
		q[i] = uint32(quo.Int64())
		total += quo.Int64()
		rem[i] = new(big.Rat).SetFrac(new(big.Int).Set(m), den)
	}
	order := make([]int, len(q))
	for i := range order {
		order[i] = i
	}
	sort.SliceStable(order, func(a, b int) bool { return rem[order[a]].Cmp(rem[order[b]]) > 0 })
	for k := 0; k < int(One-total); k++ {
		q[order[k]]++
	}
	return q, nil
}

// NewFixed checks that every probability of o is a multiple of 2^-16, zero
// outside the alive set, and that every cell sums to exactly 1, and wraps
// it. Use it for a table that is already in fixed point; Quantize rounds
// one that is not.
func NewFixed(o *tables.Optimal) (*Fixed, error) {
	if o == nil || o.Layout == nil {
		return nil, fmt.Errorf("cgen: no table")
	}
	if _, err := exact.NewTableFixed(o, Bits); err != nil {
		return nil, fmt.Errorf("cgen: not a %d-bit table: %w", Bits, err)
	}
	return &Fixed{Table: o}, nil
}

// Numerators returns the numerators over One of the probabilities of cell c, in
// member order.
func Numerators(c tables.Cell) []uint32 {
	q := make([]uint32, len(c.P))
	for i, p := range c.P {
		q[i] = uint32(math.Ldexp(p, Bits))
	}
	return q
}

// WorstCase returns the exact worst-case regret of the fixed-point rule,
// in steps, over every configuration of the layout (design notes, step 4),
// and its configuration: exact.WorstCaseScreened, which evaluates exactly
// only the configurations that the fast evaluator cannot rule out (four
// channels with 15-point pmfs: the full exact evaluation had not ended
// after 25 minutes of CPU).
func (f *Fixed) WorstCase() (exact.Worst, error) {
	et, err := exact.NewTableFixed(f.Table, Bits)
	if err != nil {
		return exact.Worst{}, fmt.Errorf("cgen: %w", err)
	}
	l := f.Table.Layout
	w, err := exact.WorstCaseScreened(l, et, l.D)
	if err != nil {
		return exact.Worst{}, fmt.Errorf("cgen: %w", err)
	}
	return w, nil
}

// Choose is the reference chooser: it returns the channel that the
// fixed-point rule picks for readings r (in steps, one per channel) and the
// uniform random number u, as the generated C function does. The top group
// and its alive channels decide as in tables.Optimal; a forced choice or a
// missing cell picks from the channels of tables.Fallback with the table's
// offsets, and a cell from its members; in both, channel or member i is
// picked for the smallest i with u < cum[i], cum[i] the sum of the
// numerators over One of channels or members 0..i (for a missing cell,
// those of exact.ShareNums), so that it is picked for exactly its
// numerator's number of the 65536 values of u. It returns -1 when len(r)
// is not the number of channels.
func (f *Fixed) Choose(r []int32, u uint16) int {
	l := f.Table.Layout
	if len(r) != l.N() {
		return -1
	}
	ri := make([]int, len(r))
	for i, x := range r {
		ri[i] = int(x)
	}
	_, alive, t, c := f.Table.Locate(ri)
	if t == nil || c < 0 {
		q := make([]uint64, len(r))
		exact.ShareNums(tables.Fallback(alive, ri, f.Table.Half), One, q)
		var cum uint64
		for i, x := range q {
			cum += x
			if uint64(u) < cum {
				return i
			}
		}
		return -1 // unreachable: the shares sum to One > u
	}
	var cum uint32
	for i, q := range Numerators(t.Cells[c]) {
		cum += q
		if uint32(u) < cum {
			return t.Members[i]
		}
	}
	// Unreachable for a valid table: the numerators sum to One > u.
	return t.Members[len(t.Members)-1]
}

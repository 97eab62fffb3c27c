package exact

import (
	"math"
	"math/big"

	"github.com/pickwise/pickwise/tables"
)

// MaxTableDen is the largest common denominator Rationalize accepts.
const MaxTableDen = 1 << 40

// rationalApprox returns the fraction a/b with the smallest b <= maxB
// within tol of x in [0, 1], by continued fractions; ok is false when there
// is none.
func rationalApprox(x float64, maxB int64, tol float64) (a, b int64, ok bool) {
	// Convergents h/k of the continued fraction of x.
	h0, h1 := int64(0), int64(1)
	k0, k1 := int64(1), int64(0)
	y := x
	for i := 0; i < 64; i++ {
		c := math.Floor(y)
		if c > 1<<40 {
			break
		}
		ci := int64(c)
		h0, h1 = h1, ci*h1+h0
		k0, k1 = k1, ci*k1+k0
		if k1 > maxB {
			return 0, 0, false
		}
		if math.Abs(float64(h1)/float64(k1)-x) <= tol {
			return h1, k1, true
		}
		frac := y - c
		if frac < 1e-300 {
			break
		}
		y = 1 / frac
	}
	return 0, 0, false
}

// Rationalize returns a copy of o whose probabilities are fractions with a
// common denominator den: each probability is replaced by the simplest
// fraction (denominator at most 2^16) within 1e-11 of it, when every
// probability has one and the least common multiple of their denominators
// is at most MaxTableDen. An LP vertex often has such probabilities (1/3,
// 2/5), and shipping them exactly keeps the table's worst case exactly at
// the optimum. Otherwise it returns Snap(o, fallbackBits) and
// 2^fallbackBits. Cells are repaired to sum to exactly 1, with no
// probability outside the alive set.
func Rationalize(o *tables.Optimal, fallbackBits uint) (*tables.Optimal, uint64) {
	lcm := big.NewInt(1)
	limit := big.NewInt(MaxTableDen)
	g := new(big.Int)
	for _, t := range o.Tables {
		for _, c := range t.Cells {
			for i, p := range c.P {
				if !c.Alive.Has(t.Members[i]) || p <= 0 {
					continue
				}
				_, b, ok := rationalApprox(math.Min(p, 1), 1<<16, 1e-11)
				if !ok {
					return Snap(o, fallbackBits), 1 << fallbackBits
				}
				bb := big.NewInt(b)
				g.GCD(nil, nil, lcm, bb)
				lcm.Mul(lcm, bb.Quo(bb, g))
				if lcm.Cmp(limit) > 0 {
					return Snap(o, fallbackBits), 1 << fallbackBits
				}
			}
		}
	}
	den := lcm.Int64()
	return remap(o, den, func(p float64) int64 {
		a, b, _ := rationalApprox(p, 1<<16, 1e-11)
		return a * (den / b)
	}), uint64(den)
}

// Package discretize puts channel noise on the reading lattice: it turns a
// noise description (a continuous distribution, a pmf, or measured errors)
// into a lattice pmf whose probabilities are exact dyadic rationals.
package discretize

import (
	"fmt"
	"math"
	"math/big"
)

// DenomBits is the exponent of the common denominator of every lattice
// probability: each probability is an integer multiple of 2^-DenomBits, so
// it is exact both as a float64 and as a rational, and the probabilities of a
// PMF sum to exactly 1.
const DenomBits = 52

// Denom is 2^DenomBits.
const Denom = uint64(1) << DenomBits

// PMF is a noise pmf on the lattice: the noise is k steps with probability
// Num[k-Lo] / 2^DenomBits, for k in [Lo, Hi]. Both end points have
// positive probability and the numerators sum to exactly 2^DenomBits.
type PMF struct {
	Lo  int      // lowest noise offset with positive probability, in steps
	Num []uint64 // numerators over 2^DenomBits, from offset Lo upwards
}

// Hi returns the highest noise offset with positive probability, in steps.
func (p PMF) Hi() int { return p.Lo + len(p.Num) - 1 }

// Width returns Hi - Lo, the spread of the noise in steps.
func (p PMF) Width() int { return len(p.Num) - 1 }

// Prob returns the probability of offset k steps as a float64. The value is
// exact.
func (p PMF) Prob(k int) float64 {
	i := k - p.Lo
	if i < 0 || i >= len(p.Num) {
		return 0
	}
	return math.Ldexp(float64(p.Num[i]), -DenomBits)
}

// Probs returns the probabilities from Lo to Hi as float64 values (exact).
func (p PMF) Probs() []float64 {
	out := make([]float64, len(p.Num))
	for i, n := range p.Num {
		out[i] = math.Ldexp(float64(n), -DenomBits)
	}
	return out
}

// Rat returns the probability of offset k steps as an exact rational.
func (p PMF) Rat(k int) *big.Rat {
	i := k - p.Lo
	if i < 0 || i >= len(p.Num) {
		return new(big.Rat)
	}
	return new(big.Rat).SetFrac(new(big.Int).SetUint64(p.Num[i]), new(big.Int).Lsh(big.NewInt(1), DenomBits))
}

// Mean returns the mean of the noise in steps.
func (p PMF) Mean() float64 {
	var m float64
	for i := range p.Num {
		m += float64(p.Lo+i) * p.Prob(p.Lo+i)
	}
	return m
}

// Std returns the standard deviation of the noise in steps.
func (p PMF) Std() float64 {
	m := p.Mean()
	var v float64
	for i := range p.Num {
		d := float64(p.Lo+i) - m
		v += d * d * p.Prob(p.Lo+i)
	}
	return math.Sqrt(v)
}

// Check reports whether p is a valid lattice pmf: non-empty, positive end
// points, numerators summing to exactly 2^DenomBits.
func (p PMF) Check() error {
	if len(p.Num) == 0 {
		return fmt.Errorf("empty pmf")
	}
	if p.Num[0] == 0 || p.Num[len(p.Num)-1] == 0 {
		return fmt.Errorf("pmf end points must have positive probability")
	}
	var s uint64
	for _, n := range p.Num {
		if n > Denom || s > Denom-n {
			return fmt.Errorf("pmf numerators exceed 2^%d", DenomBits)
		}
		s += n
	}
	if s != Denom {
		return fmt.Errorf("pmf numerators sum to %d, not 2^%d", s, DenomBits)
	}
	return nil
}

// Channel is one channel of a discretized model.
type Channel struct {
	Name string // unique name
	Kind string // noise kind as given: exact, pmf, normal, ...
	PMF  PMF    // the lattice noise pmf
	// Cut is the probability mass moved from the tails beyond the cut
	// quantiles into the end bins (zero for exact, pmf and samples).
	Cut float64
}

// Model is a discretized model: the step, an optional unit label, and the
// lattice noise of each channel.
type Model struct {
	Step     float64 // lattice step in reading units (> 0)
	Unit     string  // label of the reading unit, may be empty
	Tail     float64 // tail mass allowed to be cut from continuous noise
	Channels []Channel
}

// N returns the number of channels.
func (m *Model) N() int { return len(m.Channels) }

// Quantize turns non-negative weights into a PMF starting at offset lo whose
// numerators sum to exactly 2^DenomBits: each weight is divided by the total,
// rounded to the nearest multiple of 2^-DenomBits, the largest absorbs the
// rounding residue, and zero-probability ends are trimmed (lo moves with
// them). It fails when the weights are empty, negative, NaN, infinite or all
// zero.
func Quantize(lo int, w []float64) (PMF, error) {
	var total float64
	for i, x := range w {
		if math.IsNaN(x) || math.IsInf(x, 0) || x < 0 {
			return PMF{}, fmt.Errorf("weight %d is %g", i, x)
		}
		total += x
	}
	if len(w) == 0 || total <= 0 {
		return PMF{}, fmt.Errorf("no positive weight")
	}
	// Finite weights whose sum overflows: divide them by the largest first.
	scale := 1.0
	if math.IsInf(total, 1) {
		for _, x := range w {
			scale = max(scale, x)
		}
		total = 0
		for _, x := range w {
			total += x / scale
		}
	}
	num := make([]uint64, len(w))
	var sum uint64
	big := 0
	for i, x := range w {
		num[i] = uint64(math.Round(x / scale / total * float64(Denom)))
		sum += num[i]
		if num[i] > num[big] {
			big = i
		}
	}
	// Fix the residue on the largest entry, which dwarfs any rounding.
	if sum > Denom {
		num[big] -= sum - Denom
	} else {
		num[big] += Denom - sum
	}
	a, b := 0, len(num)
	for a < b && num[a] == 0 {
		a++
	}
	for b > a && num[b-1] == 0 {
		b--
	}
	return PMF{Lo: lo + a, Num: append([]uint64(nil), num[a:b]...)}, nil
}

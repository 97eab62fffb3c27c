package exact

import (
	"fmt"
	"math"
	"math/big"
	"math/bits"
	"sort"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables"
)

// SnapWeights turns non-negative weights into numerators over 2^bits that
// sum to exactly 2^bits: weights are normalised, rounded to the nearest
// multiple of 2^-bits (negatives and NaN count as zero), and the largest
// absorbs the residue. It fails when no weight is positive.
func SnapWeights(w []float64, bits uint) ([]uint64, error) {
	var s float64
	for _, x := range w {
		if x > 0 && !math.IsInf(x, 0) {
			s += x
		}
	}
	if !(s > 0) {
		return nil, fmt.Errorf("exact: no positive prior weight")
	}
	den := int64(1) << bits
	out := make([]uint64, len(w))
	var sum int64
	big := -1
	for i, x := range w {
		if !(x > 0) || math.IsInf(x, 0) {
			continue
		}
		q := int64(math.Round(x / s * float64(den)))
		out[i] = uint64(q)
		sum += q
		if big < 0 || out[i] > out[big] {
			big = i
		}
	}
	out[big] = uint64(int64(out[big]) + den - sum)
	return out, nil
}

// BayesRisk returns the exact Bayes risk, in steps, of the prior that puts
// weight w[k] / 2^bits on configuration configs[k] (n values, tables.Far
// outside its subset). The weights must sum to exactly 2^bits.
//
// The decision maker sees every reading of the configuration's subset Q
// and knows which channels are far below (design notes, step 6). The
// channels outside Q are placed far below at positions drawn independently
// of the configuration, so their readings carry no information about it, and
// the whole configuration is shifted by a common amount drawn uniformly from
// a range that grows without bound, so only reading differences inform. Each
// such prior has a Bayes risk no larger than the minimax regret; their limit
// is the value computed here:
//
//	sum over subsets Q, over difference vectors r of Q, of
//	min over i in Q of sum_v prior(v) P(r | v) (max v - v_i).
//
// It is therefore a lower bound on the worst-case regret of every rule, with
// no restriction on the rule.
func BayesRisk(l *tables.Layout, configs [][]int, w []uint64, bits uint) (*big.Rat, error) {
	if len(configs) != len(w) {
		return nil, fmt.Errorf("exact: %d configurations but %d weights", len(configs), len(w))
	}
	n := l.N()
	total := new(big.Int)
	for _, x := range w {
		total.Add(total, new(big.Int).SetUint64(x))
	}
	if total.Cmp(new(big.Int).Lsh(big.NewInt(1), bits)) != 0 {
		return nil, fmt.Errorf("exact: prior weights sum to %v/2^%d, not 1", total, bits)
	}
	num := nums(l)
	// Group the support of the prior by subset.
	bySet := make(map[tables.Set][]int)
	for k, v := range configs {
		if len(v) != n {
			return nil, fmt.Errorf("exact: configuration %d has %d values, want %d", k, len(v), n)
		}
		if w[k] == 0 {
			continue
		}
		q := tables.SubsetOf(v)
		lo := math.MaxInt
		for _, i := range q.Members() {
			lo = min(lo, v[i])
		}
		if q.Len() < 2 {
			// A single channel has regret 0 under every sensible rule, and
			// the decision maker knows it: contributes nothing.
			continue
		}
		if lo != 0 {
			return nil, fmt.Errorf("exact: configuration %d %v does not have minimum 0", k, v)
		}
		bySet[q] = append(bySet[q], k)
	}
	sets := make([]tables.Set, 0, len(bySet))
	for q := range bySet {
		sets = append(sets, q)
	}
	sort.Slice(sets, func(i, j int) bool { return sets[i] < sets[j] })

	risk := new(big.Int) // over 2^(bits + 52n)
	for _, q := range sets {
		sum := bayesSubset(l, num, q.Members(), configs, w, bySet[q])
		sum.Lsh(sum, uint(discretize.DenomBits*(n-q.Len())))
		risk.Add(risk, sum)
	}
	den := new(big.Int).Lsh(big.NewInt(1), bits+uint(discretize.DenomBits*n))
	return new(big.Rat).SetFrac(risk, den), nil
}

// bayesSubset returns, over 2^(bits + 52m), the sum over reading keys of
// the least expected loss of the configurations ks of the subset with
// members mem: for each key (the differences r_c - r_mem[0]) and member i,
// sum over k of w_k P(key | v_k) (max v_k - v_k,i), minimised over i.
//
// It sums over the exact difference pmf of the subset (the probability of
// a key given v is that of the noise differences key - (v_c - v_mem[0])),
// in fixed-width integers: the numerators of the difference pmf take 52m
// bits, a weight times a loss at most 64 + 32, and the sum over
// configurations adds the bits of their count.
func bayesSubset(l *tables.Layout, num [][]uint64, mem []int, configs [][]int, w []uint64, ks []int) *big.Int {
	m := len(mem)
	d := exactDifferences(l, num, mem)
	// The difference pmf's numerators as little-endian words.
	width := 1
	for _, x := range d.num {
		width = max(width, (x.BitLen()+63)/64)
	}
	words := make([]uint64, len(d.num)*width)
	for j, x := range d.num {
		for i, b := range x.Bits() {
			words[j*width+i] = uint64(b)
		}
	}
	limbs := width + 2 + (bits.Len(uint(len(ks)))+63)/64
	span := 0
	for _, k := range ks {
		for _, c := range mem {
			span = max(span, configs[k][c])
		}
	}
	span += l.S + 1
	base := int64(2*span + 1)

	entry := make(map[int64]int32)
	var slab []uint64 // m accumulators of limbs words per entry
	for _, k := range ks {
		v := configs[k]
		top := tables.Far
		for _, c := range mem {
			top = max(top, v[c])
		}
		// scale[i] = w_k (top - v_i) in 128 bits.
		var shi, slo [16]uint64
		for i, c := range mem {
			shi[i], slo[i] = bits.Mul64(w[k], uint64(top-v[c]))
		}
		for j := range d.num {
			var key int64
			for i := m - 1; i >= 1; i-- {
				key = key*base + int64(v[mem[i]]-v[mem[0]]+d.e[j*m+i]+span)
			}
			at, ok := entry[key]
			if !ok {
				at = int32(len(entry))
				entry[key] = at
				slab = append(slab, make([]uint64, m*limbs)...)
			}
			x := words[j*width : (j+1)*width]
			acc := slab[int(at)*m*limbs:]
			for i := range m {
				if shi[i] != 0 || slo[i] != 0 {
					addMulWords(acc[i*limbs:(i+1)*limbs], x, shi[i], slo[i])
				}
			}
		}
	}
	// Sum the least accumulator of every entry.
	total := make([]uint64, limbs+2)
	for e := range len(entry) {
		acc := slab[e*m*limbs : (e+1)*m*limbs]
		best := acc[:limbs]
		for i := 1; i < m; i++ {
			if a := acc[i*limbs : (i+1)*limbs]; lessWords(a, best) {
				best = a
			}
		}
		var c uint64
		for i, b := range best {
			total[i], c = bits.Add64(total[i], b, c)
		}
		for i := limbs; c != 0 && i < len(total); i++ {
			total[i], c = bits.Add64(total[i], 0, c)
		}
	}
	out := make([]big.Word, len(total))
	for i, b := range total {
		out[i] = big.Word(b)
	}
	return new(big.Int).SetBits(out)
}

// addMulWords adds x * (hi*2^64 + lo) to acc, little-endian words; acc
// must be long enough to hold the result.
func addMulWords(acc, x []uint64, hi, lo uint64) {
	// acc += x * lo
	var carry uint64
	i := 0
	for ; i < len(x); i++ {
		ph, pl := bits.Mul64(x[i], lo)
		var c uint64
		pl, c = bits.Add64(pl, carry, 0)
		ph += c
		acc[i], c = bits.Add64(acc[i], pl, 0)
		carry = ph + c
	}
	for ; carry != 0; i++ {
		acc[i], carry = bits.Add64(acc[i], carry, 0)
	}
	if hi == 0 {
		return
	}
	// acc += (x * hi) << 64
	carry = 0
	i = 0
	for ; i < len(x); i++ {
		ph, pl := bits.Mul64(x[i], hi)
		var c uint64
		pl, c = bits.Add64(pl, carry, 0)
		ph += c
		acc[i+1], c = bits.Add64(acc[i+1], pl, 0)
		carry = ph + c
	}
	for i++; carry != 0; i++ {
		acc[i], carry = bits.Add64(acc[i], carry, 0)
	}
}

// lessWords reports a < b for little-endian words of equal length.
func lessWords(a, b []uint64) bool {
	for i := len(a) - 1; i >= 0; i-- {
		if a[i] != b[i] {
			return a[i] < b[i]
		}
	}
	return false
}

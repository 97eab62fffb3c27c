package exact

import (
	"fmt"
	"math"
	"math/big"
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
		mem := q.Members()
		m := len(mem)
		// Key: differences r_c - r_mem[0], packed.
		span := 0
		for _, k := range bySet[q] {
			for _, c := range mem {
				span = max(span, configs[k][c])
			}
		}
		span += l.S + 1
		base := int64(2*span + 1)
		accs := make(map[int64][]*big.Int)
		r := make([]int, n)
		wk := new(big.Int)
		prod := make([]*big.Int, m+1)
		for i := range prod {
			prod[i] = new(big.Int)
		}
		tmp := new(big.Int)
		for _, k := range bySet[q] {
			v := configs[k]
			top := tables.Far
			for _, c := range mem {
				top = max(top, v[c])
			}
			wk.SetUint64(w[k])
			prod[0].Set(wk)
			var rec func(i int)
			rec = func(i int) {
				if i == m {
					var key int64
					for j := m - 1; j >= 1; j-- {
						key = key*base + int64(r[mem[j]]-r[mem[0]]+span)
					}
					a := accs[key]
					if a == nil {
						a = make([]*big.Int, m)
						for j := range a {
							a[j] = new(big.Int)
						}
						accs[key] = a
					}
					for j, c := range mem {
						if d := top - v[c]; d != 0 {
							a[j].Add(a[j], tmp.Mul(prod[m], tmp.SetInt64(int64(d))))
						}
					}
					return
				}
				c := mem[i]
				for kk, pk := range num[c] {
					if pk == 0 {
						continue
					}
					r[c] = v[c] + l.Lo[c] + kk
					prod[i+1].Mul(prod[i], tmp.SetUint64(pk))
					rec(i + 1)
				}
			}
			rec(0)
		}
		sum := new(big.Int)
		for _, a := range accs {
			best := a[0]
			for _, x := range a[1:] {
				if x.Cmp(best) < 0 {
					best = x
				}
			}
			sum.Add(sum, best)
		}
		sum.Lsh(sum, uint(discretize.DenomBits*(n-m)))
		risk.Add(risk, sum)
	}
	den := new(big.Int).Lsh(big.NewInt(1), bits+uint(discretize.DenomBits*n))
	return new(big.Rat).SetFrac(risk, den), nil
}

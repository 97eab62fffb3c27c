package exact

import (
	"math/big"
	"math/rand/v2"
	"testing"

	"github.com/pickwise/pickwise/tables"
)

// bayesSubsetOutcomes is bayesSubset by the definition: a sum over every
// joint noise outcome of every configuration, in big integers. The tests
// hold the difference-pmf form to it.
func bayesSubsetOutcomes(l *tables.Layout, num [][]uint64, mem []int, configs [][]int, w []uint64, ks []int) *big.Int {
	n := l.N()
	m := len(mem)
	span := 0
	for _, k := range ks {
		for _, c := range mem {
			span = max(span, configs[k][c])
		}
	}
	span += l.S + 1
	base := int64(2*span + 1)
	accs := make(map[int64][]*big.Int)
	r := make([]int, n)
	prod := make([]*big.Int, m+1)
	for i := range prod {
		prod[i] = new(big.Int)
	}
	tmp := new(big.Int)
	for _, k := range ks {
		v := configs[k]
		top := tables.Far
		for _, c := range mem {
			top = max(top, v[c])
		}
		prod[0].SetUint64(w[k])
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
	return sum
}

// TestBayesSubset holds the Bayes risk summed over the difference pmf in
// fixed-width words to the sum over every joint outcome in big integers,
// exactly, on seeded random layouts of two to five channels with random
// configurations and weights (full 64-bit weights, so that every word of
// the accumulators carries).
func TestBayesSubset(t *testing.T) {
	for _, tc := range []struct {
		name    string
		n, cfgs int
		seed    uint64
	}{
		{"two channels", 2, 8, 1},
		{"three channels", 3, 16, 2},
		{"four channels", 4, 6, 3},
		{"five channels", 5, 12, 7},
		{"one configuration", 3, 1, 5},
	} {
		t.Run(tc.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(tc.seed, 9))
			l := RandomLayout(t, rng, tc.n, true)
			num := nums(l)
			mem := tables.SetOf(seqInts(tc.n)...).Members()
			var configs [][]int
			var w []uint64
			var ks []int
			for k := range tc.cfgs {
				v := make([]int, tc.n)
				for i := range v {
					v[i] = rng.IntN(2) // close values: keys shared, risk > 0
				}
				configs = append(configs, v)
				w = append(w, rng.Uint64())
				ks = append(ks, k)
			}
			got := bayesSubset(l, num, mem, configs, w, ks)
			want := bayesSubsetOutcomes(l, num, mem, configs, w, ks)
			if got.Cmp(want) != 0 {
				t.Errorf("difference pmf %v, every outcome %v", got, want)
			}
			if want.Sign() == 0 && tc.cfgs > 1 {
				t.Error("zero risk: the check is empty")
			}
		})
	}
}

func seqInts(n int) []int {
	s := make([]int, n)
	for i := range s {
		s[i] = i
	}
	return s
}

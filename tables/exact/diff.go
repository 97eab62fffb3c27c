package exact

import (
	"math/big"
	"math/bits"

	"github.com/pickwise/pickwise/tables"
)

// diffPMF is the exact joint pmf of the noise differences a_k - a_first of
// the members of a subset (tables.Layout.Differences in exact form): point
// j has offsets e[j*m : (j+1)*m] per member (the first is 0) and
// probability num[j] / 2^(52m).
type diffPMF struct {
	mem []int
	e   []int
	num []*big.Int
}

// exactDifferences returns the exact difference pmf of the members mem,
// from the pmf numerators num, in one pass over the joint outcomes: 192-bit
// accumulators for up to three members, big integers beyond.
func exactDifferences(l *tables.Layout, num [][]uint64, mem []int) *diffPMF {
	m := len(mem)
	f := mem[0]
	wf := len(num[f]) - 1
	ext := make([]int, m)
	stride := make([]int, m)
	size := 1
	for k := m - 1; k >= 1; k-- {
		ext[k] = len(num[mem[k]]) + wf
		stride[k] = size
		size *= ext[k]
	}
	// Index of e_k = a_k - a_f along axis k: (a_k - Lo_k) + (Hi_f - a_f).
	var small []acc192
	var large []*big.Int
	if m <= 3 {
		small = make([]acc192, size)
	} else {
		large = make([]*big.Int, size)
	}
	prefix := make([]*big.Int, m+1)
	for i := range prefix {
		prefix[i] = new(big.Int)
	}
	tmp := new(big.Int)
	// rec walks axes k..m-1 below a fixed first-member index jf; for more
	// than three members prefix[k] holds the product of the numerators
	// chosen so far.
	var rec func(k, base, jf int)
	rec = func(k, base, jf int) {
		if k == m {
			if large[base] == nil {
				large[base] = new(big.Int)
			}
			large[base].Add(large[base], prefix[k])
			return
		}
		for j, pk := range num[mem[k]] {
			if pk != 0 {
				prefix[k+1].Mul(prefix[k], tmp.SetUint64(pk))
				rec(k+1, base+(j+wf-jf)*stride[k], jf)
			}
		}
	}
	for jf, pf := range num[f] {
		if pf == 0 {
			continue
		}
		switch m {
		case 2:
			// p_f p_1 has at most 104 bits.
			for j, p1 := range num[mem[1]] {
				if p1 != 0 {
					small[j+wf-jf].addMul(pf, p1)
				}
			}
		case 3:
			// p_f p_1 in 128 bits, times p_2 into 192.
			for j1, p1 := range num[mem[1]] {
				if p1 == 0 {
					continue
				}
				hi, lo := bits.Mul64(pf, p1)
				base := (j1 + wf - jf) * stride[1]
				for j2, p2 := range num[mem[2]] {
					if p2 != 0 {
						small[base+j2+wf-jf].addMul128(p2, hi, lo)
					}
				}
			}
		default:
			prefix[1].SetUint64(pf)
			rec(1, 0, jf)
		}
	}
	d := &diffPMF{mem: mem}
	for i := 0; i < size; i++ {
		var x *big.Int
		if small != nil {
			if small[i] == (acc192{}) {
				continue
			}
			x = small[i].big(new(big.Int))
		} else {
			if large[i] == nil || large[i].Sign() == 0 {
				continue
			}
			x = large[i]
		}
		d.e = append(d.e, 0)
		for k := 1; k < m; k++ {
			c := mem[k]
			d.e = append(d.e, (i/stride[k])%ext[k]-wf+l.Lo[c]-l.Lo[f])
		}
		d.num = append(d.num, x)
	}
	return d
}

// regretNumDiff returns the same integer as regretNum, summing over the
// exact difference pmf d of v's subset instead of every joint outcome.
// The rule must be translation invariant, as every rule of package tables
// is: the first member reads its value and the others v + e.
func regretNumDiff(l *tables.Layout, d *diffPMF, rule Rule, v []int, out *big.Int) {
	n := l.N()
	top := tables.Far
	for _, c := range d.mem {
		top = max(top, v[c])
	}
	r := make([]int, n)
	copy(r, v)
	q := make([]uint64, n)
	m := len(d.mem)
	inner, tmp := new(big.Int), new(big.Int)
	out.SetInt64(0)
	for j, p := range d.num {
		for k, c := range d.mem {
			r[c] = v[c] + d.e[j*m+k]
		}
		rule.Nums(r, q)
		ihi, ilo := innerNum(d.mem, q, v, top)
		if ihi == 0 && ilo == 0 {
			continue
		}
		inner.SetUint64(ihi)
		inner.Lsh(inner, 64)
		inner.Or(inner, tmp.SetUint64(ilo))
		out.Add(out, tmp.Mul(inner, p))
	}
}

package fast

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/pickwise/pickwise/tables"
)

// hashRule is a translation invariant rule whose probabilities are an
// arbitrary function of the reading differences: uneven, often zero for
// some members, and never the same along an axis, so that every value a
// pass reads matters.
type hashRule struct{ seed uint64 }

func (h hashRule) Probs(r []int, p []float64) {
	ref := tables.Far
	for _, x := range r {
		if x != tables.Far {
			ref = x
			break
		}
	}
	z := h.seed
	for _, x := range r {
		if x != tables.Far {
			z = (z ^ uint64(x-ref)) * 0x9e3779b97f4a7c15
			z ^= z >> 29
		}
	}
	var sum float64
	for c, x := range r {
		p[c] = 0
		if x == tables.Far {
			continue
		}
		z = (z ^ uint64(c)) * 0xbf58476d1ce4e5b9
		z ^= z >> 31
		if z%4 != 0 {
			p[c] = float64(z>>11) / (1 << 53)
			sum += p[c]
		}
	}
	if sum == 0 {
		for c, x := range r {
			if x != tables.Far {
				p[c] = 1
				return
			}
		}
	}
	for c := range p {
		p[c] /= sum
	}
}

// refReports returns what Regrets should report for subset q, in order,
// computed without spans or tiles: the stages of the computation over
// whole boxes, one value at a time, with the sums of the passes (rows and
// correlate) in the same order, so that every regret must agree bit for
// bit. The tiles only set the order of the reports.
func refReports(t *testing.T, e Evaluator, l *tables.Layout, rule tables.Rule, q tables.Set, d int) ([][]int, []float64) {
	t.Helper()
	s, err := newSubset(l, rule, q, d, e.workers(), e.maxBytes())
	if err != nil {
		t.Fatal(err)
	}
	k, span, mem := s.k, s.span, s.mem
	m := len(mem)
	w0, hi0 := s.w[0], s.lo[0]+s.w[0]

	// Stage 0: the rule over the box of reading differences.
	ext := make([]int, k)
	for a := range ext {
		ext[a] = 2*span + 1 + w0 + s.w[a+1]
	}
	x := make([][]float64, m)
	for i := range x {
		x[i] = make([]float64, prod(ext))
	}
	r := make([]int, l.N())
	p := make([]float64, l.N())
	for c := range r {
		r[c] = tables.Far
	}
	r[mem[0]] = 0
	idx := make([]int, k)
	for n := 0; ; n++ {
		for a := range idx {
			r[mem[a+1]] = -span + s.lo[a+1] - hi0 + idx[a]
		}
		rule.Probs(r, p)
		for i, c := range mem {
			x[i][n] = p[c]
		}
		if !next(idx, ext) {
			break
		}
	}

	// The passes along the axes, then along the diagonal.
	diag := make([]float64, w0+1)
	for t := range diag {
		diag[t] = s.p[0][w0-t]
	}
	y := make([][]float64, m)
	var yst []int
	for i := range x {
		in, iext := x[i], append([]int(nil), ext...)
		for ax := 0; ax < k; ax++ {
			pa := s.p[ax+1]
			oext := append([]int(nil), iext...)
			oext[ax] -= s.w[ax+1]
			ist := strides(iext)
			out := make([]float64, prod(oext))
			line := make([]float64, len(pa))
			clear(idx)
			for n := range out {
				off := 0
				for a := range idx {
					off += idx[a] * ist[a]
				}
				for t := range line {
					line[t] = in[off+t*ist[ax]]
				}
				if ax == k-1 {
					correlate(line, pa, 0, 0)
					out[n] = line[0]
				} else {
					rows(out[n:n+1], line, 1, pa)
				}
				next(idx, oext)
			}
			in, iext = out, oext
		}
		y[i], yst = in, strides(iext)
	}
	dstride := sumInts(yst) // one step along the diagonal

	// Every configuration, tile by tile.
	var vs [][]int
	var regs []float64
	ntiles := make([]int, k)
	for a := range ntiles {
		ntiles[a] = (2*span + s.tile[a]) / s.tile[a]
	}
	tile := make([]int, k)
	u := make([]int, k)
	line := make([]float64, w0+1)
	var one [1]float64
	for {
		ulo := make([]int, k)
		ext := make([]int, k)
		for a := range ext {
			ulo[a] = -span + tile[a]*s.tile[a]
			ext[a] = min(s.tile[a], span-ulo[a]+1)
		}
		clear(idx)
		for {
			vals := []int{0}
			for a := range u {
				u[a] = ulo[a] + idx[a]
				vals = append(vals, u[a])
			}
			sortSmall(vals)
			ok := true
			for a := 1; a < len(vals); a++ {
				ok = ok && vals[a]-vals[a-1] <= d
			}
			if ok {
				top := vals[len(vals)-1]
				var reg float64
				for i := range mem {
					ui := 0
					if i > 0 {
						ui = u[i-1]
					}
					wt := top - ui
					if wt == 0 {
						continue
					}
					off := 0
					for a := range u {
						off += (u[a] + span) * yst[a]
					}
					for t := range line {
						line[t] = y[i][off+t*dstride]
					}
					rows(one[:], line, 1, diag)
					reg += float64(wt) * one[0]
				}
				v := make([]int, l.N())
				for c := range v {
					v[c] = tables.Far
				}
				v[mem[0]] = -vals[0]
				for a := range u {
					v[mem[a+1]] = u[a] - vals[0]
				}
				vs = append(vs, v)
				regs = append(regs, reg)
			}
			if !next(idx, ext) {
				break
			}
		}
		if !next(tile, ntiles) {
			return vs, regs
		}
	}
}

// sumInts returns the sum of x.
func sumInts(x []int) int {
	s := 0
	for _, v := range x {
		s += v
	}
	return s
}

// TestBitForBit checks every report of Regrets, in order, against
// refReports, bit for bit: on models of two to five channels with uneven
// pmfs, for several rules, in one tile and in many, on one goroutine and
// on several.
func TestBitForBit(t *testing.T) {
	pmfs := [][]float64{
		{-1, 0.2, 0.5, 0.3},
		{0, 0.6, 0.4},
		{-2, 0.1, 0.2, 0, 0.4, 0.3},
		{1, 1},
		{-3, 0.3, 0.1, 0.25, 0.35},
	}
	rng := rand.New(rand.NewPCG(5, 6))
	cases := []struct {
		n, d  int
		split bool // whether to set a budget that splits the boxes into tiles
	}{
		{2, 9, false},
		{2, 9, true},
		{3, 6, false},
		{3, 6, true},
		{4, 4, false},
		{4, 4, true},
		{5, 2, false},
		{5, 2, true},
	}
	for _, c := range cases {
		l := pmfLayout(t, pmfs[:c.n]...)
		rules := []struct {
			name string
			rule tables.Rule
		}{
			{"greedy", tables.Greedy{}},
			{"offset", tables.Offset{Half: randomHalf(rng, c.n)}},
			{"hash", hashRule{rng.Uint64()}},
		}
		for _, rc := range rules {
			for _, workers := range []int{1, 2} {
				name := fmt.Sprintf("n=%d d=%d split=%v %s workers=%d", c.n, c.d, c.split, rc.name, workers)
				t.Run(name, func(t *testing.T) {
					e := Evaluator{Workers: workers}
					if c.split {
						// The goroutines' scratch and a third of the
						// largest box.
						s, err := newSubset(l, rc.rule, tables.Set(1<<uint(c.n)-1), c.d, e.workers(), DefaultMaxBytes)
						if err != nil {
							t.Fatal(err)
						}
						all := s.bytes()
						s.workers = 0
						box := s.bytes()
						e.MaxBytes = int64(all - box + box/3)
					}
					tiles, total := 0, 0
					top := math.Inf(-1)
					want := map[string]float64{}
					for _, q := range tables.Subsets(c.n) {
						s, err := newSubset(l, rc.rule, q, c.d, e.workers(), e.maxBytes())
						if err != nil {
							t.Fatal(err)
						}
						tiles = max(tiles, prodTiles(s))
						vs, regs := refReports(t, e, l, rc.rule, q, c.d)
						for j, v := range vs {
							want[fmt.Sprint(v)] = regs[j]
							top = max(top, regs[j])
						}
						total += len(vs)
						n := 0
						err = e.Regrets(l, rc.rule, q, c.d, func(v []int, reg float64) {
							if n < len(vs) && (fmt.Sprint(v) != fmt.Sprint(vs[n]) || math.Float64bits(reg) != math.Float64bits(regs[n])) {
								t.Fatalf("subset %v report %d: %v regret %.17g, want %v regret %.17g", q.Members(), n, v, reg, vs[n], regs[n])
							}
							n++
						})
						if err != nil {
							t.Fatal(err)
						}
						if n != len(vs) {
							t.Fatalf("subset %v: %d reports, want %d", q.Members(), n, len(vs))
						}
					}
					if c.split && tiles < 3 {
						t.Errorf("the budget splits the largest box into %d tiles, want several", tiles)
					}
					// WorstCase keeps its arrays from one subset to the
					// next.
					w, err := e.WorstCase(l, rc.rule, c.d)
					if err != nil {
						t.Fatal(err)
					}
					if w.Regret != top || want[fmt.Sprint(w.Values)] != top || w.Configurations != total {
						t.Errorf("worst case %.17g at %v of %d configurations, want %.17g of %d", w.Regret, w.Values, w.Configurations, top, total)
					}
				})
			}
		}
	}
}

// prodTiles returns the number of tiles of s.
func prodTiles(s *subset) int {
	n := 1
	for _, t := range s.tile {
		n *= (2*s.span + t) / t
	}
	return n
}

// randomHalf returns offsets in half steps in [-3, 3].
func randomHalf(rng *rand.Rand, n int) []int {
	h := make([]int, n)
	for i := range h {
		h[i] = rng.IntN(7) - 3
	}
	return h
}

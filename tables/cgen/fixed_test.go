package cgen

import (
	"math"
	"math/big"
	"slices"
	"testing"

	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/result"
)

// TestQuantizeCells checks the largest-remainder rounding on cells whose
// result is derived by hand from the method's definition (Hamilton's
// apportionment: integer parts first, then one unit each to the largest
// fractional parts; ties to the lower member position, as documented).
func TestQuantizeCells(t *testing.T) {
	l := solve(t, "three").Layout
	all := tables.SetOf(0, 1, 2)
	const u = 1.0 / One
	cases := []struct {
		name string
		r    []int // readings: the cell's key
		p    []float64
		want []uint32
		bad  bool
	}{
		{name: "thirds", r: []int{0, 0, 0}, p: []float64{1.0 / 3, 1.0 / 3, 1.0 / 3}, want: []uint32{21846, 21845, 21845}},
		{name: "halves", r: []int{0, 0, 0}, p: []float64{0.5, 0.5, 0}, want: []uint32{32768, 32768, 0}},
		{name: "certain-first", r: []int{0, 0, 0}, p: []float64{1, 0, 0}, want: []uint32{65536, 0, 0}},
		{name: "tie-of-halves", r: []int{0, 0, 0}, p: []float64{0.5 + u/2, 0.5 - u/2, 0}, want: []uint32{32769, 32767, 0}},
		// Quotas 0.6, 0.6, 65534.8: floors 0, 0, 65534, two units
		// missing, to the parts .8 and then the first .6.
		{name: "largest-parts", r: []int{0, 0, 0}, p: []float64{0.6 * u, 0.6 * u, 65534.8 * u}, want: []uint32{1, 0, 65535}},
		{name: "unnormalised", r: []int{0, 0, 0}, p: []float64{0.25, 0.25, 0}, want: []uint32{32768, 32768, 0}},
		{name: "mass-below", r: []int{0, 0, -10}, p: []float64{0.5, 0.25, 0.25}, bad: true},
		{name: "negative", r: []int{0, 0, 0}, p: []float64{1.5, -0.5, 0}, bad: true},
		{name: "nan", r: []int{0, 0, 0}, p: []float64{math.NaN(), 0.5, 0.5}, bad: true},
		{name: "all-zero", r: []int{0, 0, 0}, p: []float64{0, 0, 0}, bad: true},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			o := tables.NewOptimal(l)
			o.Table(all).Add(c.r, l.Alive(all, c.r), c.p)
			f, err := Quantize(o)
			if c.bad {
				if err == nil {
					t.Fatalf("Quantize accepted %v", c.p)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			got := Numerators(f.Table.Table(all).Cells[0])
			if !slices.Equal(got, c.want) {
				t.Errorf("numerators %v, want %v", got, c.want)
			}
			if _, err := NewFixed(f.Table); err != nil {
				t.Errorf("the quantized table is not a 16-bit table: %v", err)
			}
		})
	}
}

// TestQuantizeSolved checks the rounding of solved tables against its
// definition: every cell sums to exactly 65536, members certainly below
// another keep 0, and each numerator is within one unit of its quota.
func TestQuantizeSolved(t *testing.T) {
	for _, name := range []string{"two", "three"} {
		t.Run(name, func(t *testing.T) {
			sol := solve(t, name)
			f, err := Quantize(sol.Tables)
			if err != nil {
				t.Fatal(err)
			}
			if got, want := f.Table.NumCells(), sol.Tables.NumCells(); got != want {
				t.Fatalf("%d cells after rounding, %d before", got, want)
			}
			for ti, tab := range f.Table.Tables {
				src := sol.Tables.Tables[ti]
				for ci, c := range tab.Cells {
					var sum uint32
					for i, q := range Numerators(c) {
						sum += q
						quota := src.Cells[ci].P[i] * One // exact: p is a multiple of 2^-48
						if math.Abs(float64(q)-quota) >= 1 {
							t.Errorf("group %v cell %v: numerator %d, quota %g", tab.Members, c.Diff, q, quota)
						}
						if q != 0 && !c.Alive.Has(tab.Members[i]) {
							t.Errorf("group %v cell %v: channel %d is certainly below but has %d", tab.Members, c.Diff, tab.Members[i], q)
						}
					}
					if sum != One {
						t.Errorf("group %v cell %v: numerators sum to %d", tab.Members, c.Diff, sum)
					}
				}
			}
		})
	}
}

// TestChooseCounts checks that the reference chooser picks each member of a
// randomized cell for exactly its numerator's count of the 65536 values of
// u, which is what "probability q/65536" means.
func TestChooseCounts(t *testing.T) {
	for _, name := range []string{"two", "three"} {
		t.Run(name, func(t *testing.T) {
			sol := solve(t, name)
			f, err := Quantize(sol.Tables)
			if err != nil {
				t.Fatal(err)
			}
			n := sol.Layout.N()
			checked := 0
			for _, tab := range f.Table.Tables {
				for _, c := range tab.Cells {
					q := Numerators(c)
					if slices.Contains(q, One) || checked >= 6 {
						continue
					}
					checked++
					r := make([]int32, n)
					for i := range r {
						r[i] = -1 << 20 // far below the group
					}
					for i, ch := range tab.Members {
						r[ch] = int32(c.Diff[i])
					}
					count := make([]uint32, n)
					for u := 0; u < One; u++ {
						ch := f.Choose(r, uint16(u))
						if ch < 0 || ch >= n {
							t.Fatalf("Choose(%v, %d) = %d", r, u, ch)
						}
						count[ch]++
					}
					for i, ch := range tab.Members {
						if count[ch] != q[i] {
							t.Errorf("group %v cell %v: channel %d picked for %d values of u, numerator %d", tab.Members, c.Diff, ch, count[ch], q[i])
						}
					}
				}
			}
			if checked == 0 {
				t.Fatal("no randomized cell")
			}
			if got := f.Choose(make([]int32, n+1), 0); got != -1 {
				t.Errorf("Choose with %d readings for %d channels = %d, want -1", n+1, n, got)
			}
		})
	}
}

// TestFixedRegret checks the exact worst case of the rounded tables: it can
// never be below the certified lower bound of the optimum (the Bayes risk
// of the least-favourable prior bounds every rule), rounding to 2^-16 must
// cost less than 1e-3 steps, and the float evaluator of package tables, an
// independent implementation, must agree.
func TestFixedRegret(t *testing.T) {
	cases := []struct {
		name string
		want *big.Rat // exact value when known
	}{
		// Worked example of the design notes, derived by hand: the optimal
		// table shares 1/2-1/2, which 16 bits hold exactly.
		{name: "two", want: big.NewRat(1, 4)},
		{name: "three"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			sol := solve(t, c.name)
			f, err := Quantize(sol.Tables)
			if err != nil {
				t.Fatal(err)
			}
			w, err := f.WorstCase()
			if err != nil {
				t.Fatal(err)
			}
			if w.Regret.Cmp(sol.Lower) < 0 {
				t.Errorf("fixed-point worst case %v below the certified lower bound %v", result.Float(w.Regret), result.Float(sol.Lower))
			}
			gap := result.Float(new(big.Rat).Sub(w.Regret, sol.Lower))
			if gap > 1e-3 {
				t.Errorf("fixed-point worst case %v exceeds the lower bound %v by %g steps", result.Float(w.Regret), result.Float(sol.Lower), gap)
			}
			if c.want != nil && w.Regret.Cmp(c.want) != 0 {
				t.Errorf("fixed-point worst case %v, want %v", w.Regret, c.want)
			}
			fw := sol.Layout.WorstCase(f.Table, sol.Layout.D)
			if d := math.Abs(fw.Regret - result.Float(w.Regret)); d > 1e-9 {
				t.Errorf("float evaluator %v, exact %v", fw.Regret, result.Float(w.Regret))
			}
			t.Logf("lower %.12g, upper %.12g, fixed point %.12g", result.Float(sol.Lower), result.Float(sol.Upper), result.Float(w.Regret))
		})
	}
}

// TestChooseTieCounts: readings without a cell that tie among c channels
// share the 65536 values of u by exact.ShareNums: 65536/c each, the
// remainder one more each to the lowest-numbered (by hand: 65536 = 3 *
// 21845 + 1 = 2 * 32768).
func TestChooseTieCounts(t *testing.T) {
	sol := solve(t, "three")
	f, err := NewFixed(tables.NewOptimal(sol.Layout))
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name string
		r    []int32
		want []uint32
	}{
		{"three tied", []int32{0, 0, 0}, []uint32{21846, 21845, 21845}},
		{"two tied", []int32{0, 1, 1}, []uint32{0, 32768, 32768}},
		{"no tie", []int32{2, 1, 0}, []uint32{65536, 0, 0}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			count := make([]uint32, 3)
			for u := 0; u < One; u++ {
				ch := f.Choose(tc.r, uint16(u))
				if ch < 0 || ch >= 3 {
					t.Fatalf("Choose(%v, %d) = %d", tc.r, u, ch)
				}
				count[ch]++
			}
			if !slices.Equal(count, tc.want) {
				t.Errorf("Choose(%v, u) over every u picks %v times, want %v", tc.r, count, tc.want)
			}
		})
	}
}

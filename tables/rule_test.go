package tables

import (
	"math/rand/v2"
	"slices"
	"testing"
)

// TestTableIndex checks that a table finds its cells the same way with a
// flat index, with pages and with a map, and that Add returns existing
// cells: random readings, some repeated, some out of the table's range.
func TestTableIndex(t *testing.T) {
	for _, tc := range []struct {
		name    string
		members int
		span    int
	}{
		{"two members", 2, 5},
		{"three members", 3, 7},
		{"four members", 4, 3},
	} {
		t.Run(tc.name, func(t *testing.T) {
			g := Set(1<<uint(tc.members) - 1)
			newTable := func() *Table { return &Table{Group: g, Members: g.Members(), span: tc.span} }
			flat, paged, hashed := newTable(), newTable(), newTable()
			paged.pageOf = make([]int32, paged.numPages()) // forces the pages
			hashed.index = make(map[int64]int32)           // forces the map
			rng := rand.New(rand.NewPCG(1, uint64(tc.members)))
			r := make([]int, tc.members)
			for range 400 {
				for i := range r {
					r[i] = rng.IntN(2*tc.span+5) - tc.span - 2
				}
				want := hashed.Lookup(r)
				if got, pg := flat.Lookup(r), paged.Lookup(r); got != want || pg != want {
					t.Fatalf("Lookup(%v): flat %d, pages %d, map %d", r, got, pg, want)
				}
				a, p, b := flat.Add(r, g, nil), paged.Add(r, g, nil), hashed.Add(r, g, nil)
				if a != b || p != b || (want >= 0 && a != want) {
					t.Fatalf("Add(%v): flat %d, pages %d, map %d, existing %d", r, a, p, b, want)
				}
				if _, ok := flat.Key(r); ok != (a >= 0) {
					t.Fatalf("Add(%v) = %d with key in range %v", r, a, ok)
				}
			}
			if flat.dense == nil || flat.pageOf != nil || flat.index != nil {
				t.Errorf("the small table is not indexed by a flat array")
			}
			if n := len(paged.pages) / (2*tc.span + 1); n < 1 || n > len(paged.Cells) {
				t.Errorf("%d pages for %d cells", n, len(paged.Cells))
			}
			if len(flat.Cells) != len(hashed.Cells) || len(flat.Cells) == 0 {
				t.Errorf("%d cells with the flat index, %d with the map", len(flat.Cells), len(hashed.Cells))
			}
		})
	}
}

// TestTableKeys checks when a table uses a flat index: at most maxDense
// keys, (2*span+1)^(members-1) of them.
func TestTableKeys(t *testing.T) {
	for _, tc := range []struct {
		name          string
		members, span int
		want          int
	}{
		{"pair", 2, 10, 21},
		{"triple", 3, 10, 441},
		{"just under the limit", 2, (maxDense - 1) / 2, maxDense - 1},
		{"just over the limit", 2, maxDense / 2, -1},
		{"over the limit", 3, 4096, -1},
		{"far over", 9, 1000, -1},
	} {
		t.Run(tc.name, func(t *testing.T) {
			g := Set(1<<uint(tc.members) - 1)
			tb := &Table{Group: g, Members: g.Members(), span: tc.span}
			if got := tb.keys(); got != tc.want {
				t.Errorf("keys() = %d, want %d", got, tc.want)
			}
		})
	}
}

// TestFallback checks the channels a missing cell picks from, worked by
// hand: those of highest 2*r_i + half_i among the alive channels, all of
// them on a tie.
func TestFallback(t *testing.T) {
	far := Far
	for _, tc := range []struct {
		name  string
		alive Set
		r     []int
		half  []int
		want  Set
	}{
		{"highest reading", 0b111, []int{0, 3, 2}, nil, 0b010},
		{"tie shared", 0b111, []int{4, 1, 4}, nil, 0b101},
		{"three-way tie", 0b111, []int{4, 4, 4}, nil, 0b111},
		{"dead channel skipped", 0b101, []int{0, 3, 2}, nil, 0b100},
		{"dead channel not in the tie", 0b011, []int{4, 4, 4}, nil, 0b011},
		{"offset overtakes", 0b111, []int{0, 3, 2}, []int{0, 0, 3}, 0b100},     // 2*3 = 6 < 2*2+3 = 7
		{"half step decides", 0b011, []int{5, 4, far}, []int{-2, 1, 0}, 0b010}, // 8 < 9
		{"offset tie shared", 0b011, []int{5, 4, far}, []int{-1, 1, 0}, 0b011}, // 9 = 9
		{"negative offset", 0b111, []int{1, 0, -1}, []int{-3, 0, 0}, 0b010},
		{"one alive channel", 0b100, []int{9, 9, 0}, []int{9, 9, 0}, 0b100},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if got := Fallback(tc.alive, tc.r, tc.half); got != tc.want {
				t.Errorf("Fallback(%b, %v, %v) = %b, want %b", tc.alive, tc.r, tc.half, got, tc.want)
			}
		})
	}
}

// TestMissingCellProbs: at readings without a cell, Optimal.Probs shares
// a tie of Fallback equally (by hand: two-point noise on {0, 1} for every
// channel: a channel is certainly below another read more than one step
// higher).
func TestMissingCellProbs(t *testing.T) {
	l := &Layout{Lo: []int{0, 0, 0}, Hi: []int{1, 1, 1}, P: [][]float64{{0.5, 0.5}, {0.5, 0.5}, {0.5, 0.5}}, G: 2, S: 1, T: 3, D: 4}
	o := NewOptimal(l)
	for _, tc := range []struct {
		name string
		half []int
		r    []int
		want []float64
	}{
		{"three-way tie", nil, []int{0, 0, 0}, []float64{1.0 / 3, 1.0 / 3, 1.0 / 3}},
		{"two-way tie", nil, []int{0, 1, 1}, []float64{0, 0.5, 0.5}},
		{"highest", nil, []int{1, 0, 0}, []float64{1, 0, 0}},
		{"offsets break the tie", []int{1, -2, 0}, []int{0, 0, 0}, []float64{1, 0, 0}},      // scores 1, -2, 0
		{"offsets make a tie", []int{1, -1, 0}, []int{0, 1, 0}, []float64{0.5, 0.5, 0}},     // scores 1, 1, 0
		{"dead channel out of it", []int{1, -2, 0}, []int{0, 2, 1}, []float64{0, 0.5, 0.5}}, // 0 - 2 < 0 - 1: channel 0 is certainly below channel 1; scores 2, 2
	} {
		t.Run(tc.name, func(t *testing.T) {
			o.Half = tc.half
			p := make([]float64, 3)
			o.Probs(tc.r, p)
			if !slices.Equal(p, tc.want) {
				t.Errorf("Probs(%v) with offsets %v = %v, want %v", tc.r, tc.half, p, tc.want)
			}
		})
	}
}

func TestBlank(t *testing.T) {
	l := &Layout{Lo: []int{0, 0, 0}, Hi: []int{1, 1, 1}, P: [][]float64{{0.5, 0.5}, {0.5, 0.5}, {0.5, 0.5}}, G: 2, S: 1, T: 3, D: 4}
	o := NewOptimal(l)
	if err := o.SetHalf([]int{1, -2, 0}, nil); err != nil {
		t.Fatal(err)
	}
	ab := o.Table(SetOf(0, 1))
	ab.Cells = append(ab.Cells, Cell{Diff: []int{0, 1}, Alive: SetOf(0, 1), P: []float64{0.5, 0.5}})
	b := o.Blank()
	if b.Layout != l || len(b.Tables) != len(o.Tables) {
		t.Fatalf("Blank has layout %p and %d tables, want %p and %d", b.Layout, len(b.Tables), l, len(o.Tables))
	}
	for _, tb := range b.Tables {
		if len(tb.Cells) != 0 {
			t.Errorf("group %v: %d cells, want none", tb.Members, len(tb.Cells))
		}
	}
	if !slices.Equal(b.Half, o.Half) {
		t.Fatalf("Half = %v, want %v", b.Half, o.Half)
	}
	b.Half[0] = 7
	if o.Half[0] != 1 {
		t.Errorf("Blank's offsets share storage with the original's")
	}
}

// TestProbsRow checks Optimal.ProbsRow against Probs, one vector at a
// time, bit for bit: random tables (cells at random readings, with random
// probabilities) on layouts of three to five channels, with and without
// offsets for missing cells, along random rows of random subsets, the
// other channels at Far.
func TestProbsRow(t *testing.T) {
	low, high, wide := []float64{-3, 1, 1, 2, 1, 1}, []float64{0, 1, 1, 2, 1, 1}, []float64{-1, 1, 2, 1, 3, 1, 2, 1}
	for _, tc := range []struct {
		name string
		pmfs [][]float64
		half []int
	}{
		{"three channels", [][]float64{low, high, wide}, nil},
		{"three channels with offsets", [][]float64{low, high, wide}, []int{1, -4, 0}},
		{"four channels with offsets", [][]float64{low, high, low, wide}, []int{2, -3, 2, 0}},
		{"five channels", [][]float64{low, high, low, high, low}, nil},
		{"five channels with offsets", [][]float64{low, high, low, high, low}, []int{1, -4, 2, -3, 1}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			l := pmfModel(t, tc.pmfs...)
			n := l.N()
			o := NewOptimal(l)
			o.Half = tc.half
			rng := rand.New(rand.NewPCG(3, uint64(n)))
			r := make([]int, n)
			for range 3000 {
				for c := range r {
					r[c] = rng.IntN(2 * l.T)
				}
				g := l.TopGroup(r)
				alive := l.Alive(g, r)
				if alive.Len() < 2 {
					continue
				}
				p := make([]float64, g.Len())
				for i, ch := range g.Members() {
					if alive.Has(ch) {
						p[i] = rng.Float64()
					}
				}
				o.Table(g).Add(r, alive, p)
			}
			if o.NumCells() < 300 {
				t.Fatalf("only %d cells: the test checks little", o.NumCells())
			}
			for range 2000 {
				checkRandomRow(t, o, rng, n, -l.T, 3*l.T, 2*l.T, 4*l.T)
			}
		})
	}
}

// TestShareRow checks ProbsRow of Greedy and Offset against Probs, one
// vector at a time, bit for bit, along random rows of random subsets,
// with ties (readings close together, offsets of whole steps and of half
// steps).
func TestShareRow(t *testing.T) {
	for _, tc := range []struct {
		name string
		rule RowRule
	}{
		{"greedy", Greedy{}},
		{"offsets", Offset{Half: []int{2, -3, 0, 4, -1}}},
		{"even offsets", Offset{Half: []int{2, -2, 0, 4, 0}}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(5, 8))
			ties := 0
			for range 3000 {
				ties += checkRandomRow(t, tc.rule, rng, 5, 0, 6, 8, 12)
			}
			if ties < 100 {
				t.Fatalf("only %d readings with ties: the test checks little", ties)
			}
		})
	}
}

// checkRandomRow draws a subset of n channels at random (the others read
// Far), readings of its members in [lo, lo+spread), the running channel
// moved down by less than back steps, and a row of 1 to maxLen vectors,
// and checks rule.ProbsRow against Probs along it, bit for bit. It returns
// the number of vectors where more than one channel gets probability.
func checkRandomRow(t *testing.T, rule RowRule, rng *rand.Rand, n, lo, spread, back, maxLen int) int {
	t.Helper()
	var mem []int
	for len(mem) < 2 {
		mem = mem[:0]
		for c := range n {
			if rng.IntN(3) > 0 {
				mem = append(mem, c)
			}
		}
	}
	r := make([]int, n)
	for c := range r {
		r[c] = Far
	}
	for _, c := range mem {
		r[c] = lo + rng.IntN(spread)
	}
	c := mem[rng.IntN(len(mem))]
	r[c] -= rng.IntN(back)
	length := 1 + rng.IntN(maxLen)
	out := make([][]float64, len(mem))
	for i := range out {
		out[i] = make([]float64, length)
	}
	before := slices.Clone(r)
	rule.ProbsRow(r, c, mem, out)
	if !slices.Equal(r, before) {
		t.Fatalf("ProbsRow changed the readings %v to %v", before, r)
	}
	v := slices.Clone(r)
	q := make([]float64, n)
	shared := 0
	for x := range length {
		v[c] = r[c] + x
		rule.Probs(v, q)
		picked := 0
		for i, ch := range mem {
			if out[i][x] != q[ch] {
				t.Fatalf("readings %v: ProbsRow gives channel %d %v, Probs %v", v, ch, out[i][x], q[ch])
			}
			if q[ch] != 0 {
				picked++
			}
		}
		if picked > 1 {
			shared++
		}
	}
	return shared
}

package tables

import (
	"math/rand/v2"
	"testing"
)

// TestTableIndex checks that a table finds its cells the same way with a
// flat index and with a map, and that Add returns existing cells: random
// readings, some repeated, some out of the table's range.
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
			flat, hashed := newTable(), newTable()
			hashed.index = make(map[int64]int32) // forces the map
			rng := rand.New(rand.NewPCG(1, uint64(tc.members)))
			r := make([]int, tc.members)
			for range 400 {
				for i := range r {
					r[i] = rng.IntN(2*tc.span+5) - tc.span - 2
				}
				want := hashed.Lookup(r)
				if got := flat.Lookup(r); got != want {
					t.Fatalf("Lookup(%v): flat %d, map %d", r, got, want)
				}
				a, b := flat.Add(r, g, nil), hashed.Add(r, g, nil)
				if a != b || (want >= 0 && a != want) {
					t.Fatalf("Add(%v): flat %d, map %d, existing %d", r, a, b, want)
				}
				if _, ok := flat.Key(r); ok != (a >= 0) {
					t.Fatalf("Add(%v) = %d with key in range %v", r, a, ok)
				}
			}
			if flat.dense == nil || flat.index != nil {
				t.Errorf("the small table is not indexed by a flat array")
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

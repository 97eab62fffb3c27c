package minimax

import (
	"slices"
	"testing"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables"
)

// TestSymmetryGroup counts the permutations within classes of identical
// channels (a product of factorials, by hand) and checks that every member
// of an orbit has the same canonical configuration.
func TestSymmetryGroup(t *testing.T) {
	a := []float64{0.25, 0.75}
	b := []float64{0.5, 0.5}
	for _, tc := range []struct {
		name  string
		los   []int
		pmfs  [][]float64
		perms int // 0: no symmetry
	}{
		{"all different", []int{0, 0, 0}, [][]float64{a, b, {0.75, 0.25}}, 0},
		{"same pmf, other offset", []int{0, 1}, [][]float64{a, a}, 0},
		{"a pair", []int{0, 0, 0}, [][]float64{a, b, a}, 2},
		{"three alike", []int{-1, -1, -1}, [][]float64{b, b, b}, 6},
		{"two pairs", []int{0, 0, 0, 0}, [][]float64{a, b, b, a}, 4},
	} {
		t.Run(tc.name, func(t *testing.T) {
			m := &discretize.Model{Step: 1}
			for i, p := range tc.pmfs {
				pmf, err := discretize.Quantize(tc.los[i], p)
				if err != nil {
					t.Fatal(err)
				}
				m.Channels = append(m.Channels, discretize.Channel{Name: string(rune('A' + i)), PMF: pmf})
			}
			l, err := tables.NewLayout(m)
			if err != nil {
				t.Fatal(err)
			}
			s := newSymmetry(l)
			if tc.perms == 0 {
				if s != nil {
					t.Fatalf("found a symmetry of %d permutations", len(s.perms))
				}
				return
			}
			if s == nil || len(s.perms) != tc.perms {
				t.Fatalf("symmetry %v, want %d permutations", s, tc.perms)
			}
			n := l.N()
			for _, q := range tables.Subsets(n) {
				tables.Configurations(n, q, 2, func(v []int) bool {
					want := make([]int, n)
					s.canonConfig(v, want)
					orb := s.orbit(v)
					if !slices.ContainsFunc(orb, func(u []int) bool { return slices.Equal(u, v) }) {
						t.Fatalf("orbit of %v misses it: %v", v, orb)
					}
					for _, u := range orb {
						got := make([]int, n)
						s.canonConfig(u, got)
						if !slices.Equal(got, want) {
							t.Fatalf("%v and %v are in one orbit but have canonical forms %v and %v", v, u, want, got)
						}
					}
					return true
				})
			}
		})
	}
}

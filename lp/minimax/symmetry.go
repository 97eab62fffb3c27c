package minimax

import (
	"slices"

	"github.com/pickwise/pickwise/tables"
)

// symmetry is the group of permutations of the channels that map every
// channel to one with identical noise (the same offsets and the same
// probabilities). Such channels are interchangeable: the configurations of
// the model, mapped by a permutation of the group, are again
// configurations, and a rule mapped by one has the same worst case.
// Averaging an optimal rule over the group gives an optimal rule that the
// group leaves unchanged, so the LP may keep one regret row per orbit of
// configurations and one set of columns per orbit of cells.
//
// A permutation s maps channel i to s[i]; it maps a value or reading
// vector v to w with w[s[i]] = v[i].
type symmetry struct {
	perms [][]int // the group, identity first, in lexicographic order
	n     int
	tmp   []int
}

// newSymmetry returns the symmetry group of layout l, or nil when no two
// channels have identical noise.
func newSymmetry(l *tables.Layout) *symmetry {
	n := l.N()
	class := make([]int, n) // class[i]: the lowest channel with i's noise
	trivial := true
	for i := range n {
		class[i] = i
		for j := range i {
			if l.Lo[j] == l.Lo[i] && slices.Equal(l.P[j], l.P[i]) {
				class[i] = j
				trivial = false
				break
			}
		}
	}
	if trivial {
		return nil
	}
	s := &symmetry{n: n, tmp: make([]int, n)}
	// Every permutation within the classes, generated in lexicographic
	// order, so that the identity comes first.
	p := make([]int, n)
	used := make([]bool, n)
	var rec func(i int)
	rec = func(i int) {
		if i == n {
			s.perms = append(s.perms, slices.Clone(p))
			return
		}
		for j := range n {
			if !used[j] && class[j] == class[i] {
				used[j], p[i] = true, j
				rec(i + 1)
				used[j] = false
			}
		}
	}
	rec(0)
	return s
}

// apply writes the image of v under permutation s into w.
func apply(s, v, w []int) {
	for i, x := range v {
		w[s[i]] = x
	}
}

// canonConfig writes into w the canonical member of the orbit of
// configuration v: its lexicographically least image.
func (s *symmetry) canonConfig(v, w []int) {
	copy(w, v)
	for _, p := range s.perms[1:] {
		apply(p, v, s.tmp)
		if slices.Compare(s.tmp, w) < 0 {
			copy(w, s.tmp)
		}
	}
}

// orbit returns the distinct images of configuration v, in lexicographic
// order.
func (s *symmetry) orbit(v []int) [][]int {
	var out [][]int
	for _, p := range s.perms {
		w := make([]int, len(v))
		apply(p, v, w)
		out = append(out, w)
	}
	slices.SortFunc(out, slices.Compare)
	return slices.CompactFunc(out, slices.Equal)
}

// mapSet returns the image of channel set g under permutation p.
func mapSet(p []int, g tables.Set) tables.Set {
	var out tables.Set
	for i, j := range p {
		if g.Has(i) {
			out |= 1 << uint(j)
		}
	}
	return out
}

// canonCell returns the permutation that maps the cell of group g at
// readings r to the canonical cell of its orbit: the image whose group
// mask, and then whose table key, is least. o gives the tables.
func (s *symmetry) canonCell(o *tables.Optimal, g tables.Set, r []int) []int {
	best := s.perms[0]
	bestG := g
	bestK, _ := o.Table(g).Key(r)
	for _, p := range s.perms[1:] {
		pg := mapSet(p, g)
		if pg > bestG {
			continue
		}
		apply(p, r, s.tmp)
		k, _ := o.Table(pg).Key(s.tmp)
		if pg < bestG || k < bestK {
			best, bestG, bestK = p, pg, k
		}
	}
	return best
}

package exact

import (
	"math/big"
	"math/rand/v2"
	"testing"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables"
)

// lopsided is a translation-invariant exact rule with uneven
// probabilities: the numerators depend on each channel's reading minus
// the lowest reading of the channels present, so that every cell of the
// sum is weighted differently.
type lopsided struct{}

func (lopsided) Den() uint64 { return 1 << 20 }

func (lopsided) Nums(r []int, q []uint64) {
	low := 0
	first := true
	for _, x := range r {
		if x > tables.Far/2 && (first || x < low) {
			low, first = x, false
		}
	}
	var w [16]uint64
	var s uint64
	for i, x := range r {
		if x > tables.Far/2 {
			w[i] = uint64(1 + (x-low)*(x-low)%7 + i)
			s += w[i]
		}
	}
	var given uint64
	last := -1
	for i := range r {
		q[i] = 0
		if w[i] != 0 {
			q[i] = w[i] * (1 << 20) / s
			given += q[i]
			last = i
		}
	}
	q[last] += 1<<20 - given
}

// TestRegretNumDiff: the regret numerator summed over the exact
// difference pmf equals the one summed over every joint noise outcome (the
// definition), exactly, at every configuration of every subset, for
// greedy, offset and a lopsided rule, on seeded random models of two to
// four channels with zeros inside the supports (four channels take the
// big-integer path).
func TestRegretNumDiff(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 3))
	for trial := 0; trial < 9; trial++ {
		n := 2 + trial%3
		l := RandomLayout(t, rng, n, true)
		num := nums(l)
		half := l.OffsetHalfSteps()
		for _, rule := range []Rule{Greedy(n), Offset(half), lopsided{}} {
			want, got := new(big.Int), new(big.Int)
			for _, q := range tables.Subsets(n) {
				mem := q.Members()
				d := exactDifferences(l, num, mem)
				tables.Configurations(n, q, min(l.D, 4), func(v []int) bool {
					regretNum(l, num, rule, v, mem, want)
					regretNumDiff(l, d, rule, v, got)
					if want.Cmp(got) != 0 {
						t.Fatalf("trial %d, rule %T, configuration %v: %v by difference pmf, %v by outcomes", trial, rule, v, got, want)
					}
					return true
				})
			}
		}
	}
}

// RandomLayout returns the layout of a seeded random model of n channels
// with 1- to 4-point pmfs at offsets from -3 to 1 steps; with gaps, points
// inside a support may have probability 0. The external tests of this
// package use it too.
func RandomLayout(t testing.TB, rng *rand.Rand, n int, gaps bool) *tables.Layout {
	t.Helper()
	m := &discretize.Model{Step: 1}
	for i := 0; i < n; i++ {
		k := 1 + rng.IntN(4)
		w := make([]float64, k)
		for j := range w {
			if !gaps || j == 0 || j == k-1 || rng.IntN(3) > 0 {
				w[j] = 0.1 + rng.Float64()
			}
		}
		p, err := discretize.Quantize(rng.IntN(5)-3, w)
		if err != nil {
			t.Fatal(err)
		}
		m.Channels = append(m.Channels, discretize.Channel{Name: "c", PMF: p})
	}
	l, err := tables.NewLayout(m)
	if err != nil {
		t.Fatal(err)
	}
	return l
}

package tables

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"github.com/pickwise/pickwise/discretize"
)

// TestConfigurations counts configurations by hand: value vectors on the
// subset with minimum 0 and sorted gaps of at most d.
func TestConfigurations(t *testing.T) {
	for _, tc := range []struct {
		name string
		n    int
		q    Set
		d    int
		want int
	}{
		// (0,0) (0,1) (1,0) (0,2) (2,0)
		{"pair, gaps <= 2", 2, SetOf(0, 1), 2, 5},
		// sorted profiles 000, 001, 011, 012: 1 + 3 + 3 + 6 assignments
		{"triple, gaps <= 1", 3, SetOf(0, 1, 2), 1, 13},
		// a pair inside three channels: the third stays Far
		{"pair of three, gaps <= 1", 3, SetOf(0, 2), 1, 3},
	} {
		t.Run(tc.name, func(t *testing.T) {
			seen := make(map[[3]int]bool)
			count := 0
			Configurations(tc.n, tc.q, tc.d, func(v []int) bool {
				var k [3]int
				copy(k[:], v)
				if seen[k] {
					t.Errorf("configuration %v enumerated twice", v)
				}
				seen[k] = true
				for i, x := range v {
					if tc.q.Has(i) != (x > Far/2) {
						t.Errorf("configuration %v: channel %d membership wrong", v, i)
					}
				}
				count++
				return true
			})
			if count != tc.want {
				t.Errorf("%d configurations, want %d", count, tc.want)
			}
		})
	}
}

func pmfModel(t testing.TB, pmfs ...[]float64) *Layout {
	t.Helper()
	m := &discretize.Model{Step: 1}
	for _, w := range pmfs {
		p, err := discretize.Quantize(int(w[0]), w[1:])
		if err != nil {
			t.Fatal(err)
		}
		m.Channels = append(m.Channels, discretize.Channel{Name: "c", PMF: p})
	}
	l, err := NewLayout(m)
	if err != nil {
		t.Fatal(err)
	}
	return l
}

// TestOffsets checks offsets derived by hand. An exact channel needs none.
// A channel that always reads 2 steps high has zero regret with any offset
// in [-2.5, -1.5] steps (half steps -5..-3): the rule picks the smallest
// |theta|, -1.5 steps. The coin channel (noise -1 or +1) is symmetric: 0.
func TestOffsets(t *testing.T) {
	l := pmfModel(t, []float64{0, 1}, []float64{2, 1}, []float64{-1, 0.5, 0, 0.5})
	got := l.OffsetHalfSteps()
	want := []int{0, -3, 0}
	for i := range want {
		if got[i] != want[i] {
			t.Errorf("offsets %v half steps, want %v", got, want)
			break
		}
	}
}

// TestLayoutDistances checks G, S, T and D on a hand example: spreads 0,
// 2 and 3 steps, noise ranges [0,0], [-1,1], [0,3].
func TestLayoutDistances(t *testing.T) {
	l := pmfModel(t, []float64{0, 1}, []float64{-1, 1, 1, 1}, []float64{0, 1, 1, 1, 1})
	// G = 2 + 3; S = hi_2 - lo_1 = 3 - (-1); T = G + S; D = G + 2S.
	if l.G != 5 || l.S != 4 || l.T != 9 || l.D != 13 {
		t.Errorf("G, S, T, D = %d, %d, %d, %d, want 5, 4, 9, 13", l.G, l.S, l.T, l.D)
	}
	r := []int{0, 9, Far}
	if g := l.TopGroup(r); g != SetOf(0, 1) {
		t.Errorf("top group of %v: %v, want channels 0 and 1", r, g.Members())
	}
	r = []int{0, 10, Far}
	if g := l.TopGroup(r); g != SetOf(1) {
		t.Errorf("top group of %v: %v, want channel 1 alone", r, g.Members())
	}
	// Channel 0 (exact, reads 0) is certainly below channel 1 when
	// r_0 - r_1 < lo_0 - hi_1 = -1, i.e. r_1 >= 2.
	if !l.Below(0, 1, 0, 2) || l.Below(0, 1, 0, 1) {
		t.Error("certainly-below test wrong at the boundary")
	}
}

// TestDifferences checks the difference pmf against a hand count and
// against the sum over all joint outcomes.
func TestDifferences(t *testing.T) {
	// Channel 0: -1 or +1 with 1/2 each; channel 1: 0 or 1 with 1/4, 3/4.
	// a_1 - a_0 is 1 (1/8), 2 (3/8), -1 (1/8), 0 (3/8): worked by hand.
	l := pmfModel(t, []float64{-1, 0.5, 0, 0.5}, []float64{0, 0.25, 0.75})
	d := l.Differences(SetOf(0, 1))
	want := map[int]float64{-1: 0.125, 0: 0.375, 1: 0.125, 2: 0.375}
	if d.Len() != len(want) {
		t.Fatalf("%d points, want %d", d.Len(), len(want))
	}
	prev := -100
	for k := 0; k < d.Len(); k++ {
		e := d.Point(k)
		if e[0] != 0 || e[1] <= prev {
			t.Errorf("point %d: %v (first offset must be 0, points increasing)", k, e)
		}
		prev = e[1]
		if got := d.Prob[k]; math.Abs(got-want[e[1]]) > 1e-15 {
			t.Errorf("P(e=%d) = %g, want %g", e[1], got, want[e[1]])
		}
	}

	// Three channels, a subset of two that skips one, and the full set:
	// every point's probability equals the sum over joint outcomes with
	// those differences.
	l = pmfModel(t, []float64{-2, 0.1, 0, 0.3, 0.6}, []float64{0, 0.5, 0.5}, []float64{-1, 0.2, 0.2, 0.2, 0.4})
	for _, q := range []Set{SetOf(0, 2), SetOf(1, 2), SetOf(0, 1, 2)} {
		sums := make(map[[3]int]float64)
		mem := q.Members()
		l.Outcomes(q, func(a []int, p float64) {
			var k [3]int
			for _, c := range mem {
				k[c] = a[c] - a[mem[0]]
			}
			if p != 0 {
				sums[k] += p
			}
		})
		d := l.Differences(q)
		total := 0.0
		for k := 0; k < d.Len(); k++ {
			var key [3]int
			copy(key[:], d.Point(k))
			if math.Abs(sums[key]-d.Prob[k]) > 1e-15 {
				t.Errorf("set %v point %v: %g, outcomes give %g", q, key, d.Prob[k], sums[key])
			}
			total += d.Prob[k]
		}
		if d.Len() != len(sums) || math.Abs(total-1) > 1e-12 {
			t.Errorf("set %v: %d points summing to %g, outcomes give %d points", q, d.Len(), total, len(sums))
		}
	}
}

// TestOffsetWorstDefinition checks the tail-sum evaluation of the offset
// rule's worst case against its definition, a direct sum over the noise
// outcomes at every value difference, on seeded random pmfs with zeros.
func TestOffsetWorstDefinition(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 7))
	for trial := 0; trial < 30; trial++ {
		lo := rng.IntN(9) - 6
		p := make([]float64, 1+rng.IntN(8))
		var s float64
		for k := range p {
			if rng.IntN(4) > 0 {
				p[k] = rng.Float64()
			}
			s += p[k]
		}
		if s == 0 {
			p[0], s = 1, 1
		}
		for k := range p {
			p[k] /= s
		}
		below := make([]float64, len(p)+1)
		above := make([]float64, len(p)+1)
		for k := range p {
			below[k+1] = below[k] + p[k]
		}
		for k := len(p) - 1; k >= 0; k-- {
			above[k] = above[k+1] + p[k]
		}
		hi := lo + len(p) - 1
		for m := -2*hi - 2; m <= -2*lo+2; m++ {
			var want float64
			for d := -40; d <= 40; d++ {
				var wrong float64
				for k, pk := range p {
					switch s := 2*(d+lo+k) + m; {
					case d != 0 && s == 0:
						wrong += pk / 2
					case d > 0 && s < 0, d < 0 && s > 0:
						wrong += pk
					}
				}
				want = math.Max(want, float64(abs(d))*wrong)
			}
			if got := offsetWorst(lo, p, below, above, m); math.Abs(got-want) > 1e-14 {
				t.Fatalf("pmf %v from %d, offset %d half steps: %g, direct sum %g", p, lo, m, got, want)
			}
		}
	}
}

// TestGroupAndAliveDefinitions checks TopGroup and Alive against their
// definitions (design notes, "Groups and tables"), computed the plain
// way: the group by sorting the readings and walking down from the
// highest until a gap exceeds T, the alive channels by testing Below on
// every pair. Readings are drawn close together, with ties, and some at
// Far.
func TestGroupAndAliveDefinitions(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 17))
	l := pmfModel(t, []float64{-3, 1, 1, 1, 1, 1}, []float64{0, 1, 1, 1, 1, 1},
		[]float64{-1, 1, 2, 1}, []float64{0, 1}, []float64{2, 1, 0, 1})
	n := l.N()
	group := func(r []int) Set {
		order := make([]int, n)
		for i := range order {
			order[i] = i
		}
		slices.SortStableFunc(order, func(a, b int) int { return r[b] - r[a] })
		s := SetOf(order[0])
		for i := 1; i < n; i++ {
			if r[order[i-1]]-r[order[i]] > l.T || r[order[i]] <= Far/2 {
				break
			}
			s |= 1 << uint(order[i])
		}
		return s
	}
	alive := func(a Set, r []int) Set {
		var out Set
		for _, k := range a.Members() {
			below := false
			for _, j := range a.Members() {
				below = below || (j != k && l.Below(k, j, r[k], r[j]))
			}
			if !below {
				out |= 1 << uint(k)
			}
		}
		return out
	}
	r := make([]int, n)
	joined, dead := 0, 0
	for range 20000 {
		for i := range r {
			r[i] = rng.IntN(3*l.T) - l.T
			if rng.IntN(6) == 0 {
				r[i] = Far
			}
		}
		g := l.TopGroup(r)
		if want := group(r); g != want {
			t.Fatalf("top group of %v: %v, want %v", r, g.Members(), want.Members())
		}
		if g.Len() > 1 {
			joined++
		}
		a := l.Alive(g, r)
		if want := alive(g, r); a != want {
			t.Fatalf("alive channels of group %v at %v: %v, want %v", g.Members(), r, a.Members(), want.Members())
		}
		if a != g {
			dead++
		}
	}
	if joined < 1000 || dead < 1000 {
		t.Fatalf("only %d draws with a group and %d with a channel certainly below: the test checks little", joined, dead)
	}
}

// BenchmarkLocate measures what a table rule does at every reading vector
// an evaluation visits: the top group and its alive channels, for five
// channels with 5-point pmfs, alternately biased low and high.
func BenchmarkLocate(b *testing.B) {
	low, high := []float64{-3, 1, 1, 2, 1, 1}, []float64{0, 1, 1, 2, 1, 1}
	l := pmfModel(b, low, high, low, high, low)
	rng := rand.New(rand.NewPCG(1, 2))
	rs := make([][]int, 1024)
	for i := range rs {
		rs[i] = make([]int, l.N())
		for c := range rs[i] {
			rs[i][c] = rng.IntN(2 * l.T)
		}
	}
	var sink Set
	b.ResetTimer()
	for i := range b.N {
		r := rs[i%len(rs)]
		g := l.TopGroup(r)
		sink ^= l.Alive(g, r)
	}
	_ = sink
}

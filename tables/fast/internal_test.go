package fast

import (
	"testing"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables"
)

// TestEarlierIsEnumerationOrder checks the order used to break ties
// against the order in which tables.Configurations lists configurations.
func TestEarlierIsEnumerationOrder(t *testing.T) {
	for _, q := range tables.Subsets(4) {
		var prev []int
		mem := q.Members()
		tables.Configurations(4, q, 3, func(v []int) bool {
			if prev != nil && (!earlier(prev, v, mem) || earlier(v, prev, mem)) {
				t.Fatalf("subset %v: %v listed before %v, earlier disagrees", mem, prev, v)
			}
			prev = append(prev[:0], v...)
			return true
		})
	}
}

// TestTiles checks that a small memory budget splits the box of a subset
// into tiles that fit it, and that an impossible one is refused.
func TestTiles(t *testing.T) {
	l := pmfLayout(t, []float64{-1, 1, 2, 1}, []float64{-1, 1, 0, 1, 1}, []float64{-1, 2, 1, 1, 1, 1})
	q := tables.SetOf(0, 1, 2)
	whole, err := newSubset(l, tables.Greedy{}, q, l.D, 1, DefaultMaxBytes)
	if err != nil {
		t.Fatal(err)
	}
	side := 2*whole.span + 1
	if whole.tile[0] != side || whole.tile[1] != side {
		t.Errorf("default budget: tiles %v, want the whole box of side %d", whole.tile, side)
	}
	const budget = 1 << 16
	s, err := newSubset(l, tables.Greedy{}, q, l.D, 1, budget)
	if err != nil {
		t.Fatal(err)
	}
	if s.tile[0] >= side || s.tile[1] >= side || s.bytes() > budget {
		t.Errorf("budget %d: tiles %v of %.0f bytes for a box of side %d", budget, s.tile, s.bytes(), side)
	}
	if _, err := newSubset(l, tables.Greedy{}, q, l.D, 1, 1000); err == nil {
		t.Errorf("a budget of 1000 bytes was accepted")
	}
}

// TestLastRange checks the interval of valid last differences against a
// direct test of the sorted gaps.
func TestLastRange(t *testing.T) {
	const d = 3
	s := &subset{d: d}
	gapsOK := func(vals []int) bool {
		v := append([]int(nil), vals...)
		sortSmall(v)
		for i := 1; i < len(v); i++ {
			if v[i]-v[i-1] > d {
				return false
			}
		}
		return true
	}
	for a := -10; a <= 10; a++ {
		for b := -10; b <= 10; b++ {
			lo, hi := s.lastRange([]int{a, b})
			for x := -20; x <= 20; x++ {
				if in, want := lo <= x && x <= hi, gapsOK([]int{0, a, b, x}); in != want {
					t.Fatalf("u=(%d, %d): lastRange [%d, %d] holds %d: %v, want %v", a, b, lo, hi, x, in, want)
				}
			}
		}
	}
}

// PMFModel returns a model at step 1 with one channel per pmf: the lowest
// noise offset in steps, then the weights from it up. It is exported for
// the package's external tests, which share it.
func PMFModel(t testing.TB, pmfs ...[]float64) *discretize.Model {
	t.Helper()
	m := &discretize.Model{Step: 1}
	for i, w := range pmfs {
		p, err := discretize.Quantize(int(w[0]), w[1:])
		if err != nil {
			t.Fatal(err)
		}
		m.Channels = append(m.Channels, discretize.Channel{Name: string(rune('A' + i)), Kind: "pmf", PMF: p})
	}
	return m
}

// pmfLayout returns the layout of PMFModel(t, pmfs...).
func pmfLayout(t testing.TB, pmfs ...[]float64) *tables.Layout {
	t.Helper()
	l, err := tables.NewLayout(PMFModel(t, pmfs...))
	if err != nil {
		t.Fatal(err)
	}
	return l
}

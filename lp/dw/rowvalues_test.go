package dw_test

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/pickwise/pickwise/lp/dw"
	"github.com/pickwise/pickwise/lp/gonumlp"
)

// wantRowValues returns, per part, a_v·x over the part's blocks of the
// point that chooses pick (nothing in the blocks past its end) for the
// rows from..nrows-1 of p, and the sums of |a_vj·x_j| over the same
// terms, computed entry by entry from the program.
func wantRowValues(p *program, nrows int, pick []uint8, from, nparts int, part func(b int) int) (want, scale [][]float64) {
	x := make([]float64, p.ncols)
	for b, at := range pick {
		x[p.blocks[b][at]] = 1 / p.mult[b][at]
	}
	blockOf := make([]int, p.ncols)
	for b, cols := range p.blocks {
		for _, j := range cols {
			blockOf[j] = b
		}
	}
	want = make([][]float64, nparts)
	scale = make([][]float64, nparts)
	for q := range want {
		want[q] = make([]float64, nrows-from)
		scale[q] = make([]float64, nrows-from)
	}
	for v := from; v < nrows; v++ {
		for e, j := range p.rows[v].idx {
			if x[j] != 0 {
				q := part(blockOf[j])
				want[q][v-from] += p.rows[v].val[e] * x[j]
				scale[q][v-from] += math.Abs(p.rows[v].val[e] * x[j])
			}
		}
	}
	return want, scale
}

// how says how row values are expected to be computed.
type how int

const (
	either how = iota
	mustFull
	mustUpdate
)

// TestRowValues checks the row values of sequences of points, most of
// them one or two blocks away from the one before, some new in every
// block, against the product computed entry by entry, as rows and blocks
// are added in four batches (the last two small, with rows only);
// and that the values are updated where few blocks change, but never more
// than MaxChain times in a row. Values without terms must be zero.
func TestRowValues(t *testing.T) {
	for _, tc := range []struct {
		name   string
		seed   uint64
		nb, nl int
		parts  int
	}{
		{"one part", 1, 60, 40, 0},
		{"three parts", 2, 60, 40, 3},
		{"a part per column", 3, 40, 30, 1000},
		{"more rows than blocks", 4, 30, 120, 2},
	} {
		t.Run(tc.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(tc.seed, 5))
			// Rows 0..r1-1 reach blocks 0..half-1, the others all
			// blocks; blocks half.. come with rows r1..r2-1, and rows
			// r2..r3-1 and r3.. come alone.
			half, r1, r2, r3 := tc.nb/2, tc.nl/2, tc.nl-4, tc.nl-2
			p := randomProgram(rng, tc.nb, tc.nl, func(k int) int {
				if k < r1 {
					return half
				}
				return tc.nb
			})
			split := p.blocks[half][0]
			m, err := dw.New(p.problem(0, split, p.rows[:r1], seq(half)))
			if err != nil {
				t.Fatal(err)
			}
			defer m.Close()
			if tc.parts > 0 {
				m.Parts(func(col int) int { return col % tc.parts })
			}
			nrows, nb := r1, half // as loaded
			chain := 0            // updates since the last full product from row 0
			check := func(step string, pick []uint8, from int, expect how) {
				t.Helper()
				pick = append([]uint8(nil), pick...)
				full0, upd0 := dw.RowCounts(m)
				got := dw.RowValues(m, pick, from)
				full1, upd1 := dw.RowCounts(m)
				updated := upd1 == upd0+1 && full1 == full0
				if !updated && !(full1 == full0+1 && upd1 == upd0) {
					t.Fatalf("%s: %d full products and %d updates, want one in all", step, full1-full0, upd1-upd0)
				}
				switch {
				case expect == mustFull && updated:
					t.Errorf("%s: updated, want the full product", step)
				case expect == mustUpdate && !updated && chain < dw.MaxChain:
					// An update is refused only to end a chain.
					t.Errorf("%s: full product after %d updates, want an update", step, chain)
				}
				switch {
				case updated && from == 0:
					chain++
				case from == 0:
					chain = 0
				}
				if chain > dw.MaxChain {
					t.Fatalf("%s: %d updates in a row", step, chain)
				}
				nparts := 0
				for b := range nb {
					nparts = max(nparts, dw.BlockPart(m, b)+1)
				}
				want, scale := wantRowValues(p, nrows, pick, from, nparts, func(b int) int { return dw.BlockPart(m, b) })
				if len(got) != len(want) {
					t.Fatalf("%s: %d parts, want %d", step, len(got), len(want))
				}
				for q := range want {
					if len(got[q]) != len(want[q]) {
						t.Fatalf("%s: part %d has %d rows, want %d", step, q, len(got[q]), len(want[q]))
					}
					for v := range want[q] {
						// No term: exactly zero.
						if d := math.Abs(got[q][v] - want[q][v]); d > 1e-12*scale[q][v] {
							t.Fatalf("%s: part %d row %d: %.17g, want %.17g", step, q, from+v, got[q][v], want[q][v])
						}
					}
				}
			}
			// walk changes one or two blocks of pick at each step, but
			// all of them at two steps, past the first chain of updates,
			// and checks the new points.
			walk := func(stage string, pick []uint8) {
				t.Helper()
				for s := range 3 * dw.MaxChain {
					expect := mustUpdate
					if s == dw.MaxChain+5 || s == dw.MaxChain+6 {
						// Another column in every block that has one.
						for b := range pick {
							n := len(p.blocks[b])
							pick[b] = uint8((int(pick[b]) + 1 + rng.IntN(max(1, n-1))) % n)
						}
						expect = mustFull
					} else {
						for range 1 + rng.IntN(2) {
							b := rng.IntN(len(pick))
							pick[b] = uint8(rng.IntN(len(p.blocks[b])))
						}
					}
					check(stage, pick, 0, expect)
				}
			}
			// add loads rows up to rows and blocks up to blocks, and
			// checks the last point on the new rows and on all rows,
			// a point on the old blocks only, walks from the last
			// point extended to the new blocks, and checks points one
			// block and all blocks away on the new rows.
			add := func(stage string, pick []uint8, rows, blocks int) []uint8 {
				t.Helper()
				first, ncols := p.ncols, p.ncols
				if blocks < tc.nb {
					ncols = p.blocks[blocks][0]
				}
				if blocks > nb {
					first = p.blocks[nb][0]
				}
				batch := p.problem(first, ncols, p.rows[nrows:rows], seq(blocks)[nb:])
				if err := m.AddColumns(batch.ColLo, batch.ColUp, batch.Obj); err != nil {
					t.Fatal(err)
				}
				if err := m.AddRows(batch); err != nil {
					t.Fatal(err)
				}
				old := nrows
				nrows, nb = rows, blocks
				check(stage+": last point, new rows", pick, old, mustUpdate)
				check(stage+": last point, all rows", pick, 0, mustUpdate)
				for len(pick) < nb {
					pick = append(pick, uint8(rng.IntN(len(p.blocks[len(pick)]))))
				}
				check(stage+": all blocks, new rows", pick, old, either)
				check(stage+": first half of the blocks", pick[:half], 0, either)
				check(stage+": all blocks, all rows", pick, 0, either)
				walk(stage, pick)
				pick[0] = uint8((int(pick[0]) + 1) % len(p.blocks[0]))
				check(stage+": one block, new rows", pick, old, mustUpdate)
				other := append([]uint8(nil), pick...)
				for b := range other {
					n := len(p.blocks[b])
					other[b] = uint8((int(other[b]) + 1 + rng.IntN(max(1, n-1))) % n)
				}
				check(stage+": all blocks, new rows", other, old, mustFull)
				return pick
			}
			pick := make([]uint8, half)
			for b := range pick {
				pick[b] = uint8(rng.IntN(len(p.blocks[b])))
			}
			check("first point", pick, 0, mustFull)
			walk("first rows", pick)
			pick = add("rows and blocks", pick, r2, tc.nb)
			pick = add("rows only", pick, r3, tc.nb)
			add("more rows only", pick, tc.nl, tc.nb)
		})
	}
}

// TestSolveUpdates solves programs with many blocks, where row values
// are updated, against gonum's simplex, and checks that a second model of
// the same program gives the same solution bit for bit.
func TestSolveUpdates(t *testing.T) {
	for _, tc := range []struct {
		name   string
		seed   uint64
		nb, nl int
		parts  int
	}{
		{"one part", 21, 80, 20, 0},
		{"parts", 22, 80, 30, 4},
	} {
		t.Run(tc.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(tc.seed, 9))
			p := randomProgram(rng, tc.nb, tc.nl, func(int) int { return tc.nb })
			q := p.problem(0, p.ncols, p.rows, seq(tc.nb))
			ref, err := gonumlp.Solver{}.Solve(context.Background(), q)
			if err != nil {
				t.Fatal(err)
			}
			var first []float64
			for run := range 2 {
				m, err := dw.New(q)
				if err != nil {
					t.Fatal(err)
				}
				if tc.parts > 0 {
					m.Parts(func(col int) int { return col % tc.parts })
				}
				sol, err := m.Solve(context.Background())
				if err != nil {
					t.Fatal(err)
				}
				if _, updates := dw.RowCounts(m); updates == 0 {
					t.Errorf("run %d: no row values were updated", run)
				}
				m.Close()
				if math.Abs(sol.Objective-ref.Objective) > 1e-9*math.Max(1, math.Abs(ref.Objective)) {
					t.Errorf("run %d: optimum %.12g, gonum %.12g", run, sol.Objective, ref.Objective)
				}
				checkSolution(t, p, sol, 1e-9)
				got := append([]float64{sol.Objective}, sol.X...)
				got = append(got, sol.RowDual...)
				if run == 0 {
					first = got
					continue
				}
				for i := range got {
					if math.Float64bits(got[i]) != math.Float64bits(first[i]) {
						t.Fatalf("entry %d of the second solve %.17g, first %.17g", i, got[i], first[i])
					}
				}
			}
		})
	}
}

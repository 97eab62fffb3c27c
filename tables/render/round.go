package render

import (
	"fmt"
	"math"
	"math/big"
	"sort"

	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/exact"
	"github.com/pickwise/pickwise/tables/result"
)

// Den is the denominator of the printed probabilities: a printed
// procedure randomizes by drawing a whole number from 1 to Den.
const Den = 100

// Printed is the table a printed procedure shows and its exact worst case.
type Printed struct {
	// Tables holds the solution's tables with every probability rounded
	// to a multiple of 1/Den; each cell still sums to exactly 1 and gives
	// nothing to a channel certainly below another. Cells keep their
	// order.
	Tables *tables.Optimal
	// Regret is the exact worst-case regret of Tables, in steps. It is
	// the figure the printed procedure guarantees, not the optimum's.
	Regret *big.Rat
	// Worst is the configuration reaching Regret, in steps (tables.Far
	// for channels far below the others).
	Worst []int
}

// Round rounds the tables of sol to hundredths, as a printed procedure
// shows them, and certifies the result: the worst-case regret of the
// rounded tables is computed exactly (exact.WorstCase over the layout's
// configurations), so it may exceed the optimum by the rounding's cost.
//
// Each cell is rounded by largest remainders: every probability is cut
// down to a whole number of hundredths and the hundredths still missing go
// to the largest remainders, the first member on a tie.
func Round(sol *result.Solution) (*Printed, error) {
	if err := check(sol); err != nil {
		return nil, err
	}
	rt, err := roundTables(sol.Tables)
	if err != nil {
		return nil, err
	}
	et, err := exact.NewTableDen(rt, Den)
	if err != nil {
		return nil, fmt.Errorf("render: rounded table: %w", err)
	}
	w := exact.WorstCase(sol.Layout, et, sol.Layout.D)
	return &Printed{Tables: rt, Regret: w.Regret, Worst: w.Values}, nil
}

// roundTables returns a copy of o with probabilities rounded to 1/Den.
func roundTables(o *tables.Optimal) (*tables.Optimal, error) {
	l := o.Layout
	out := o.Blank()
	r := make([]int, l.N())
	for ti, t := range o.Tables {
		dst := out.Tables[ti]
		for _, c := range t.Cells {
			q, err := roundCell(c.P)
			if err != nil {
				return nil, fmt.Errorf("render: group %v cell %v: %w", t.Members, c.Diff, err)
			}
			p := make([]float64, len(q))
			for i, x := range q {
				p[i] = float64(x) / Den
			}
			for i, ch := range t.Members {
				r[ch] = c.Diff[i]
			}
			dst.Add(r, c.Alive, p)
		}
	}
	return out, nil
}

// roundCell returns numerators over Den, summing to Den, nearest to p by
// largest remainders.
func roundCell(p []float64) ([]int, error) {
	q := make([]int, len(p))
	rem := make([]*big.Rat, len(p))
	sum := 0
	den := big.NewRat(Den, 1)
	for i, x := range p {
		if !(x >= 0 && x <= 1) || math.IsNaN(x) {
			return nil, fmt.Errorf("probability %v out of [0, 1]", x)
		}
		v := new(big.Rat).Mul(new(big.Rat).SetFloat64(x), den)
		fl := new(big.Int).Quo(v.Num(), v.Denom()) // floor: v >= 0
		q[i] = int(fl.Int64())
		rem[i] = v.Sub(v, new(big.Rat).SetInt(fl))
		sum += q[i]
	}
	if sum > Den {
		return nil, fmt.Errorf("probabilities sum to more than 1")
	}
	order := make([]int, len(p))
	for i := range order {
		order[i] = i
	}
	sort.SliceStable(order, func(a, b int) bool { return rem[order[a]].Cmp(rem[order[b]]) > 0 })
	for k := 0; sum < Den; k++ {
		if k == len(order) || rem[order[k]].Sign() == 0 {
			return nil, fmt.Errorf("probabilities sum to %d/%d after rounding, not 1", sum, Den)
		}
		q[order[k]]++
		sum++
	}
	return q, nil
}

// nums returns the numerators over Den of a rounded cell.
func nums(p []float64) []int {
	q := make([]int, len(p))
	for i, x := range p {
		q[i] = int(math.Round(x * Den))
	}
	return q
}

package lp

import (
	"bufio"
	"fmt"
	"io"
	"math"
	"strconv"
)

// WriteMPS writes p to w in free MPS format, so that other LP solvers can
// read it. Rows are named R0, R1, ..., columns C0, C1, ..., and the
// objective row OBJ; the objective sense is minimisation. Numbers are
// written in the shortest form that reads back as the same float64.
//
// A row with two finite, different bounds is written as a G row at its lower
// bound with a range of RowUp-RowLo, so its upper bound is recovered as
// RowLo+range, which may differ from RowUp in the last bit. A row with no
// finite bound is written as a free (N) row.
func WriteMPS(w io.Writer, p *Problem, name string) error {
	if err := p.Validate(); err != nil {
		return fmt.Errorf("lp: writing MPS: %w", err)
	}
	for j := range p.NumCols() {
		if math.IsInf(p.ColLo[j], 1) || math.IsInf(p.ColUp[j], -1) {
			return fmt.Errorf("lp: writing MPS: column %d: bounds [%g, %g] admit no value", j, p.ColLo[j], p.ColUp[j])
		}
	}
	for i := range p.NumRows() {
		if math.IsInf(p.RowLo[i], 1) || math.IsInf(p.RowUp[i], -1) {
			return fmt.Errorf("lp: writing MPS: row %d: bounds [%g, %g] admit no value", i, p.RowLo[i], p.RowUp[i])
		}
	}
	if name == "" {
		name = "LP"
	}
	for _, r := range name {
		if r <= ' ' || r > '~' {
			return fmt.Errorf("lp: writing MPS: problem name %q must be printable ASCII without spaces", name)
		}
	}

	bw := bufio.NewWriter(w)
	num := func(x float64) string { return strconv.FormatFloat(x, 'g', -1, 64) }
	fmt.Fprintf(bw, "NAME %s\nROWS\n N OBJ\n", name)
	for i := range p.NumRows() {
		lo, up := p.RowLo[i], p.RowUp[i]
		var typ string
		switch {
		case lo == up:
			typ = "E"
		case math.IsInf(lo, -1) && math.IsInf(up, 1):
			typ = "N"
		case math.IsInf(lo, -1):
			typ = "L"
		default:
			typ = "G"
		}
		fmt.Fprintf(bw, " %s R%d\n", typ, i)
	}

	// COLUMNS lists the matrix column by column: transpose the rows.
	n := p.NumCols()
	colStart := make([]int, n+1)
	for i := range p.NumRows() {
		for _, j := range p.Index[p.RowStart[i]:p.RowStart[i+1]] {
			colStart[j+1]++
		}
	}
	for j := range n {
		colStart[j+1] += colStart[j]
	}
	rowOf := make([]int32, colStart[n])
	valOf := make([]float64, colStart[n])
	next := append([]int(nil), colStart[:n]...)
	for i := range p.NumRows() {
		for k := p.RowStart[i]; k < p.RowStart[i+1]; k++ {
			j := p.Index[k]
			rowOf[next[j]] = int32(i)
			valOf[next[j]] = p.Value[k]
			next[j]++
		}
	}
	fmt.Fprintf(bw, "COLUMNS\n")
	for j := range n {
		if p.Obj[j] != 0 || colStart[j] == colStart[j+1] {
			// An empty column is listed with its objective entry, even
			// zero, so that it exists.
			fmt.Fprintf(bw, " C%d OBJ %s\n", j, num(p.Obj[j]))
		}
		for k := colStart[j]; k < colStart[j+1]; k++ {
			fmt.Fprintf(bw, " C%d R%d %s\n", j, rowOf[k], num(valOf[k]))
		}
	}

	fmt.Fprintf(bw, "RHS\n")
	for i := range p.NumRows() {
		lo, up := p.RowLo[i], p.RowUp[i]
		rhs := lo
		if math.IsInf(lo, -1) {
			rhs = up
		}
		if !math.IsInf(rhs, 0) && rhs != 0 {
			fmt.Fprintf(bw, " RHS R%d %s\n", i, num(rhs))
		}
	}
	ranges := false
	for i := range p.NumRows() {
		lo, up := p.RowLo[i], p.RowUp[i]
		if lo != up && !math.IsInf(lo, 0) && !math.IsInf(up, 0) {
			if !ranges {
				fmt.Fprintf(bw, "RANGES\n")
				ranges = true
			}
			fmt.Fprintf(bw, " RNG R%d %s\n", i, num(up-lo))
		}
	}

	// BOUNDS: the MPS default is [0, +inf).
	bounds := false
	bound := func(typ string, j int, v string) {
		if !bounds {
			fmt.Fprintf(bw, "BOUNDS\n")
			bounds = true
		}
		if v == "" {
			fmt.Fprintf(bw, " %s BND C%d\n", typ, j)
		} else {
			fmt.Fprintf(bw, " %s BND C%d %s\n", typ, j, v)
		}
	}
	for j := range n {
		lo, up := p.ColLo[j], p.ColUp[j]
		switch {
		case lo == 0 && math.IsInf(up, 1):
		case lo == up:
			bound("FX", j, num(lo))
		case math.IsInf(lo, -1) && math.IsInf(up, 1):
			bound("FR", j, "")
		default:
			if math.IsInf(lo, -1) {
				bound("MI", j, "")
			}
			if !math.IsInf(up, 1) {
				bound("UP", j, num(up))
			}
			// Written after UP: some readers take a negative upper
			// bound with the default lower bound as lower bound -inf,
			// and a negative upper bound always has lo != 0 here.
			if !math.IsInf(lo, -1) && lo != 0 {
				bound("LO", j, num(lo))
			}
		}
	}
	fmt.Fprintf(bw, "ENDATA\n")
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("lp: writing MPS: %w", err)
	}
	return nil
}

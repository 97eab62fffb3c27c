package render

import (
	"bytes"
	"fmt"
	"io"
	"strconv"
	"strings"

	"github.com/olekukonko/tablewriter"
	"github.com/olekukonko/tablewriter/renderer"
	"github.com/olekukonko/tablewriter/tw"

	"github.com/pickwise/pickwise/tables/result"
)

// Text writes the decision tables of sol as terminal tables: one table per
// group of channels that has cells, headed by the group's channels, with a
// row per cell ordered by reading differences. The first columns hold the
// reading differences r_k - r_first of the group's other channels in
// reading units, the last the probability of picking each channel: "0" and
// "1" are exact, other values have four decimals (tiny ones show as
// "<0.0001" or ">0.9999"), and "-" marks a channel certainly below another
// in that cell.
func Text(w io.Writer, sol *result.Solution, opt Options) error {
	if err := check(sol); err != nil {
		return err
	}
	m := sol.Model
	u := newUnits(m)
	nm := names(m)
	for i := range nm {
		nm[i] = printable(nm[i])
	}
	unit := ""
	if m.Unit != "" {
		unit = " [" + printable(m.Unit) + "]"
	}
	var buf bytes.Buffer
	fmt.Fprintf(&buf, "step %s%s; %d channels; tables hold %d cells\n", u.of(1), printable(u.suffix()), len(nm), sol.Tables.NumCells())
	for _, t := range sol.Tables.Tables {
		if len(t.Cells) == 0 {
			continue
		}
		g := groupNames(nm, t)
		fmt.Fprintf(&buf, "\ngroup %s: %d cells\n", strings.Join(g, "+"), len(t.Cells))
		var head []string
		for _, name := range g[1:] {
			head = append(head, "r("+name+")-r("+g[0]+")"+unit)
		}
		for _, name := range g {
			head = append(head, "P("+name+")")
		}
		var rows [][]string
		for _, ci := range sortedCells(t) {
			c := t.Cells[ci]
			var row []string
			for _, d := range c.Diff[1:] {
				row = append(row, u.of(d))
			}
			for k, ch := range t.Members {
				row = append(row, probText(c.P[k], c.Alive.Has(ch)))
			}
			rows = append(rows, row)
		}
		sym := tw.NewSymbols(tw.StyleLight)
		if opt.ASCII {
			sym = tw.NewSymbols(tw.StyleASCII)
		}
		tab := tablewriter.NewTable(&buf,
			tablewriter.WithRenderer(renderer.NewBlueprint(tw.Rendition{Symbols: sym})),
			tablewriter.WithHeaderAutoFormat(tw.Off),
			tablewriter.WithRowAlignment(tw.AlignRight),
		)
		tab.Header(head)
		if err := tab.Bulk(rows); err != nil {
			return fmt.Errorf("render: group %s: %w", strings.Join(g, "+"), err)
		}
		if err := tab.Render(); err != nil {
			return fmt.Errorf("render: group %s: %w", strings.Join(g, "+"), err)
		}
	}
	return flush(w, &buf)
}

// probText formats a probability for the terminal.
func probText(p float64, alive bool) string {
	switch {
	case p == 0 && !alive:
		return "-"
	case p == 0:
		return "0"
	case p == 1:
		return "1"
	}
	s := strconv.FormatFloat(p, 'f', 4, 64)
	switch s {
	case "0.0000":
		return "<0.0001"
	case "1.0000":
		return ">0.9999"
	}
	return s
}

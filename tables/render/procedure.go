package render

import (
	"fmt"
	"math/big"
	"strconv"
	"strings"

	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/result"
)

// caution is the warning every printed procedure carries.
const caution = "The guarantee above is a statement about the noise model listed here and about nothing else. " +
	"If your channels' real noise differs from that model, the figure does not apply: " +
	"check the model against your own calibration data before relying on this procedure, " +
	"and where the codes, standards or accepted practices of your field say otherwise, follow them."

// document is a printable procedure, independent of its markup. Every
// string is plain text: the Markdown and HTML writers escape it.
type document struct {
	Title    string
	Model    grid     // one row per channel
	Facts    []string // about the model
	Cert     []string // the certificate of what is printed
	Caution  string
	Steps    []string // how to use the tables, in order
	Below    *grid    // certainly-below thresholds (three or more channels)
	Sections []section
}

// section is the procedure of one group of channels.
type section struct {
	Title string
	Intro []string
	Table grid
	Notes []string
}

// grid is a table: a header row, then rows that start with Heads (row
// headers) followed by Entries.
type grid struct {
	Class string // "model", "below", "pairs", "grid" or "list"
	Head  []string
	Rows  []gridRow
}

type gridRow struct {
	Heads   []string
	Entries []entry
}

// entry is one entry of a grid. Class is "cell" for a table cell, "out"
// for an entry of a decision grid that is not one (a forced choice, or
// readings of another group), and empty in other tables.
type entry struct {
	Text  string
	Class string
}

// procedure builds the printable procedure of sol.
type procedure struct {
	sol *result.Solution
	pr  *Printed
	lab []string
	u   units
	n   int
}

func newDocument(sol *result.Solution, opt Options) (*document, error) {
	if err := check(sol); err != nil {
		return nil, err
	}
	pr := opt.Printed
	if pr == nil {
		var err error
		if pr, err = Round(sol); err != nil {
			return nil, err
		}
	}
	if pr.Tables == nil || pr.Regret == nil || pr.Tables.Layout.N() != sol.Layout.N() {
		return nil, fmt.Errorf("render: the printed table does not belong to this solution")
	}
	p := &procedure{sol: sol, pr: pr, lab: labels(sol.Model), u: newUnits(sol.Model), n: sol.Layout.N()}
	d := &document{Title: opt.title(), Caution: caution}
	p.model(d)
	p.certificate(d)
	p.steps(d)
	for _, t := range pr.Tables.Tables {
		if len(t.Cells) == 0 {
			continue
		}
		switch len(t.Members) {
		case 2:
			d.Sections = append(d.Sections, p.pairs(t))
		case 3:
			d.Sections = append(d.Sections, p.grid(t))
		default:
			d.Sections = append(d.Sections, p.list(t))
		}
	}
	return d, nil
}

// model describes the channels and the lattice.
func (p *procedure) model(d *document) {
	m := p.sol.Model
	u := p.u
	withName := false
	for i, c := range m.Channels {
		if p.lab[i] != c.Name {
			withName = true
		}
	}
	unit := ""
	if m.Unit != "" {
		unit = " (" + m.Unit + ")"
	}
	d.Model.Class = "model"
	d.Model.Head = []string{"channel"}
	if withName {
		d.Model.Head = []string{"label", "channel"}
	}
	d.Model.Head = append(d.Model.Head, "noise", "lattice support"+unit, "mean"+unit, "sd"+unit, "tail mass moved")
	for i, c := range m.Channels {
		var row gridRow
		if withName {
			row.Heads = []string{p.lab[i], c.Name}
		} else {
			row.Heads = []string{c.Name}
		}
		pm := c.PMF
		for _, s := range []string{
			c.Kind,
			fmt.Sprintf("%s to %s", u.of(pm.Lo), u.of(pm.Hi())),
			strconv.FormatFloat(pm.Mean()*m.Step, 'g', 4, 64),
			strconv.FormatFloat(pm.Std()*m.Step, 'g', 4, 64),
			strconv.FormatFloat(c.Cut, 'g', 3, 64),
		} {
			row.Entries = append(row.Entries, entry{Text: s})
		}
		d.Model.Rows = append(d.Model.Rows, row)
	}
	d.Facts = []string{
		fmt.Sprintf("Step h = %s%s: every reading and every noise offset is a whole multiple of h.", u.of(1), u.suffix()),
		fmt.Sprintf("%d channels, each read once; a reading is the channel's true value plus its noise, independent across channels, with the lattice pmf summarised above.", p.n),
		"Regret is the true value of the best channel minus the true value of the channel chosen, averaged over the noise and the draws; the worst case is over all true values.",
	}
}

// certificate states the exact worst case of the printed procedure beside
// the optimum's certified interval.
func (p *procedure) certificate(d *document) {
	m := p.sol.Model
	sfx := p.u.suffix()
	reg := result.Units(p.pr.Regret, m.Step)
	d.Cert = append(d.Cert, fmt.Sprintf("Worst-case regret of this procedure as printed (probabilities rounded to hundredths), certified in exact arithmetic: %s%s.", figure(reg, true), sfx))
	lo, up := p.sol.Lower, p.sol.Upper
	if lo == nil || up == nil {
		return
	}
	lo, up = result.Units(lo, m.Step), result.Units(up, m.Step)
	if lo.Cmp(up) == 0 {
		d.Cert = append(d.Cert, fmt.Sprintf("Optimum for this model (the best worst case of any rule), certified exactly: %s%s.", figure(lo, true), sfx))
	} else {
		l, _ := decimal(lo, 6, false)
		h, _ := decimal(up, 6, true)
		d.Cert = append(d.Cert, fmt.Sprintf("Optimum for this model (the best worst case of any rule), certified to lie between %s and %s%s.", l, h, sfx))
	}
	cost := new(big.Rat).Sub(reg, lo)
	if cost.Sign() <= 0 {
		d.Cert = append(d.Cert, "Rounding to hundredths costs nothing here: the printed procedure is optimal.")
	} else {
		c, _ := decimal(cost, 3, true)
		d.Cert = append(d.Cert, fmt.Sprintf("Rounding to hundredths costs at most %s%s over the optimum.", c, sfx))
	}
}

// figure formats an exact regret: as a decimal when it is one, else as a
// small fraction with its decimal, else as a bound rounded up (up) or down.
func figure(r *big.Rat, up bool) string {
	s, exact := decimal(r, 6, up)
	if exact {
		return s
	}
	if r.Denom().Cmp(big.NewInt(1000)) <= 0 {
		a, _ := decimal(r, 6, up)
		return r.RatString() + " (" + a + ")"
	}
	if up {
		return "at most " + s
	}
	return "at least " + s
}

// steps explains how to use the tables.
func (p *procedure) steps(d *document) {
	l := p.sol.Layout
	u := p.u
	draw := "Where an entry says to draw, draw a whole number from 1 to 100, each equally likely (a 100-sided die, two 10-sided dice, or a random number generator), afresh for every decision, and choose as the entry says."
	if p.n == 2 {
		d.Steps = []string{
			fmt.Sprintf("Read both channels once; readings are whole multiples of h = %s%s.", u.of(1), u.suffix()),
			fmt.Sprintf("Compute r(%s) − r(%s), the reading of %s minus the reading of %s, and act on its line below.", p.lab[1], p.lab[0], p.lab[1], p.lab[0]),
			draw,
		}
		return
	}
	d.Steps = []string{
		fmt.Sprintf("Read every channel once; readings are whole multiples of h = %s%s.", u.of(1), u.suffix()),
		fmt.Sprintf("Find the group: sort the readings from the highest down; the group is the channel with the highest reading and each following channel whose reading is at most %s%s below the one before it, stopping at the first larger gap. Channels outside the group are never chosen.", u.of(l.T), u.suffix()),
		"Within the group, channel k is certainly below channel j when r(j) − r(k) exceeds the threshold in row k, column j of the table below; such a channel is never chosen. If only one channel of the group is left, choose it.",
		"Otherwise find the group's table below and look up the differences between each channel's reading and the reading of the group's first channel.",
		draw,
	}
	b := &grid{Class: "below", Head: []string{"threshold" + u.paren() + ": k is certainly below j when r(j) − r(k) exceeds"}}
	for _, lab := range p.lab {
		b.Head = append(b.Head, "j = "+lab)
	}
	for k := 0; k < p.n; k++ {
		row := gridRow{Heads: []string{"k = " + p.lab[k]}}
		for j := 0; j < p.n; j++ {
			s := "–"
			if j != k {
				s = u.of(l.Hi[j] - l.Lo[k])
			}
			row.Entries = append(row.Entries, entry{Text: s})
		}
		b.Rows = append(b.Rows, row)
	}
	d.Below = b
}

// groupTitle names group t by its labels.
func (p *procedure) groupTitle(t *tables.Table) string {
	var s []string
	for _, ch := range t.Members {
		s = append(s, p.lab[ch])
	}
	return "Group " + strings.Join(s, "+")
}

// diffName is "r(X) − r(Y)" for members k and 0 of t.
func (p *procedure) diffName(t *tables.Table, k int) string {
	return "r(" + p.lab[t.Members[k]] + ") − r(" + p.lab[t.Members[0]] + ")"
}

// decide returns what the printed rule does at readings r, seen from
// group t: whether r makes t's channels the top group, and either the
// numerators of the table cell (over Den, per member of t) or the channels
// it is forced to pick from (see forcedName; none for a cell).
func (p *procedure) decide(t *tables.Table, r []int) (inGroup bool, q []int, forced tables.Set) {
	g, alive, tt, c := p.pr.Tables.Locate(r)
	if g != t.Group {
		return false, nil, tables.Fallback(alive, r, p.pr.Tables.Half)
	}
	if tt != nil && c >= 0 {
		return true, nums(tt.Cells[c].P), 0
	}
	return true, nil, tables.Fallback(alive, r, p.pr.Tables.Half)
}

// draws returns the ranges of a draw from 1 to Den, in member order, as
// label and range pairs; members with nothing are left out.
func (p *procedure) draws(t *tables.Table, q []int) (lab, ranges []string) {
	at := 1
	for k, x := range q {
		if x == 0 {
			continue
		}
		lab = append(lab, p.lab[t.Members[k]])
		ranges = append(ranges, span(at, at+x-1))
		at += x
	}
	return lab, ranges
}

// span is "a to b", or "a" when a = b.
func span(a, b int) string {
	if a == b {
		return strconv.Itoa(a)
	}
	return fmt.Sprintf("%d to %d", a, b)
}

// choice is the full text of a cell's choice.
func (p *procedure) choice(t *tables.Table, q []int) string {
	lab, ranges := p.draws(t, q)
	if len(lab) == 1 {
		return "choose " + lab[0]
	}
	var s []string
	for i := range lab {
		s = append(s, ranges[i]+" choose "+lab[i])
	}
	return "draw a number from 1 to 100: " + strings.Join(s, ", ")
}

// short is the compact text of a cell's choice, for grids.
func (p *procedure) short(t *tables.Table, q []int) string {
	lab, ranges := p.draws(t, q)
	if len(lab) == 1 {
		return lab[0]
	}
	var s []string
	for i := range lab {
		s = append(s, lab[i]+" "+strings.Replace(ranges[i], " to ", "–", 1))
	}
	return strings.Join(s, ", ")
}

// pairs is the procedure of a two-channel group: one row per reading
// difference from the first table cell to the last, and a line for each
// range outside it, where the choice is forced.
func (p *procedure) pairs(t *tables.Table) section {
	a, b := p.lab[t.Members[0]], p.lab[t.Members[1]]
	T := p.sol.Layout.T
	type pick struct {
		cell   bool
		q      []int
		forced tables.Set
	}
	// Beyond ±(T+1) the top group is a single channel: the choice there is
	// the one at the ends of this range.
	lo, hi := -T-1, T+1
	picks := make([]pick, hi-lo+1)
	for d := lo; d <= hi; d++ {
		_, q, f := p.decide(t, readings(p.n, t, []int{0, d}))
		picks[d-lo] = pick{cell: q != nil, q: q, forced: f}
	}
	first, last := -1, -1
	for i, pk := range picks {
		if pk.cell || pk.forced != picks[0].forced {
			if first < 0 {
				first = i
			}
		}
		if pk.cell || pk.forced != picks[len(picks)-1].forced {
			last = i
		}
	}
	s := section{Title: p.groupTitle(t)}
	dn := p.diffName(t, 1)
	if p.n > 2 {
		s.Intro = append(s.Intro, fmt.Sprintf("When %s and %s form the group.", a, b))
	}
	s.Table.Class = "pairs"
	s.Table.Head = []string{dn + p.u.paren(), "choice"}
	for i := first; i <= last; i++ {
		pk := picks[i]
		e := entry{Class: "cell"}
		switch {
		case !pk.cell:
			e.Class = "out"
			e.Text = "(choose " + p.forcedName(pk.forced) + ")"
		case pk.q[1] == Den:
			e.Text = "choose " + b
		case pk.q[0] == Den:
			e.Text = "choose " + a
		default:
			e.Text = fmt.Sprintf("choose %s with probability %s: draw a number from 1 to 100; %s choose %s, otherwise %s",
				b, strconv.FormatFloat(float64(pk.q[1])/Den, 'f', -1, 64), span(1, pk.q[1]), b, a)
		}
		s.Table.Rows = append(s.Table.Rows, gridRow{Heads: []string{p.u.of(lo + i)}, Entries: []entry{e}})
	}
	s.Notes = []string{
		fmt.Sprintf("%s ≤ %s%s: choose %s.", dn, p.u.of(lo+first-1), p.u.suffix(), p.forcedName(picks[0].forced)),
		fmt.Sprintf("%s ≥ %s%s: choose %s.", dn, p.u.of(lo+last+1), p.u.suffix(), p.forcedName(picks[len(picks)-1].forced)),
	}
	for i := first; i <= last; i++ {
		if !picks[i].cell {
			s.Notes = append(s.Notes, "An entry in parentheses has no table cell: the choice there is forced (\"A or B\": one of the two, with equal chances).")
			break
		}
	}
	return s
}

// forcedName names the channels of a choice without a table cell: one
// label, or on a tie "A or B" (equal chances; see tables.Fallback).
func (p *procedure) forcedName(s tables.Set) string {
	var names []string
	for _, ch := range s.Members() {
		names = append(names, p.lab[ch])
	}
	return strings.Join(names, " or ")
}

// outside is the note for readings of a group without an entry.
func (p *procedure) outside(t *tables.Table, where string) string {
	how := "the one with the highest reading"
	if h := p.pr.Tables.Half; h != nil {
		var parts []string
		for _, ch := range t.Members {
			parts = append(parts, fmt.Sprintf("%s %s%s", p.lab[ch], p.u.ofHalf(h[ch]), p.u.suffix()))
		}
		how = "the one with the highest reading plus its offset (" + strings.Join(parts, ", ") + ")"
	}
	return fmt.Sprintf("Readings that make %s the group but have no entry %s: choose, among the channels not certainly below another, %s (on a tie, one of the tied channels, with equal chances).",
		strings.TrimPrefix(p.groupTitle(t), "Group "), where, how)
}

// grid is the procedure of a three-channel group: rows r_2 - r_1, columns
// r_3 - r_1, over the range of the table's cells.
func (p *procedure) grid(t *tables.Table) section {
	r0, r1 := t.Cells[0].Diff[1], t.Cells[0].Diff[1]
	c0, c1 := t.Cells[0].Diff[2], t.Cells[0].Diff[2]
	for _, c := range t.Cells {
		r0, r1 = min(r0, c.Diff[1]), max(r1, c.Diff[1])
		c0, c1 = min(c0, c.Diff[2]), max(c1, c.Diff[2])
	}
	s := section{Title: p.groupTitle(t)}
	rn, cn := p.diffName(t, 1), p.diffName(t, 2)
	axes := fmt.Sprintf("Rows: %s; columns: %s", rn, cn)
	if p.u.unit != "" {
		axes += "; both in " + p.u.unit
	}
	s.Intro = []string{
		axes + ".",
		"A label alone is the channel to choose. \"A 1–40, B 41–100\" means: draw a number from 1 to 100 and choose A on 1 to 40, B on 41 to 100. " +
			"(X): no table cell; X is forced. (X or Y): no table cell; choose X or Y, with equal chances. –: these readings do not make this group (step 2).",
	}
	s.Table.Class = "grid"
	s.Table.Head = []string{rn + " ↓  " + cn + " →"}
	for d3 := c0; d3 <= c1; d3++ {
		s.Table.Head = append(s.Table.Head, p.u.of(d3))
	}
	for d2 := r0; d2 <= r1; d2++ {
		row := gridRow{Heads: []string{p.u.of(d2)}}
		for d3 := c0; d3 <= c1; d3++ {
			in, q, f := p.decide(t, readings(p.n, t, []int{0, d2, d3}))
			switch {
			case !in:
				row.Entries = append(row.Entries, entry{Text: "–", Class: "out"})
			case q != nil:
				row.Entries = append(row.Entries, entry{Text: p.short(t, q), Class: "cell"})
			default:
				row.Entries = append(row.Entries, entry{Text: "(" + p.forcedName(f) + ")", Class: "out"})
			}
		}
		s.Table.Rows = append(s.Table.Rows, row)
	}
	s.Notes = []string{p.outside(t, "in this grid")}
	return s
}

// list is the procedure of a group of four or more channels: one row per
// table cell, ordered by reading differences.
func (p *procedure) list(t *tables.Table) section {
	s := section{Title: p.groupTitle(t)}
	s.Table.Class = "list"
	for k := 1; k < len(t.Members); k++ {
		s.Table.Head = append(s.Table.Head, p.diffName(t, k)+p.u.paren())
	}
	s.Table.Head = append(s.Table.Head, "choice")
	for _, ci := range sortedCells(t) {
		c := t.Cells[ci]
		row := gridRow{}
		for _, d := range c.Diff[1:] {
			row.Heads = append(row.Heads, p.u.of(d))
		}
		row.Entries = []entry{{Text: p.choice(t, nums(c.P)), Class: "cell"}}
		s.Table.Rows = append(s.Table.Rows, row)
	}
	s.Notes = []string{p.outside(t, "in this list")}
	return s
}

package render

import (
	"bytes"
	"fmt"
	"io"
	"strings"

	"github.com/pickwise/pickwise/tables/result"
)

// Markdown writes the printable procedure of sol as Markdown (CommonMark
// with pipe tables): the model, the certificate of what is printed beside
// the optimum's certified interval, a caution, how to use the tables, and
// one section per group of channels that has table cells.
//
// The procedure shows the tables rounded to hundredths (see Round): a
// two-channel group gets one row per reading difference r_2 - r_1 from
// its first table cell to its last ("choose B", "choose A", or "choose B
// with probability 0.37: draw a number from 1 to 100; 1 to 37 choose B,
// otherwise A") and a line for each range outside, where the choice is
// forced; a three-channel group gets a grid, rows r_2 - r_1 and columns
// r_3 - r_1; larger groups get a list of their cells. Channels are named
// by their names when all are short, else by the letters A, B, C, ...
// with a key in the model table. Channel names and the unit are escaped.
func Markdown(w io.Writer, sol *result.Solution, opt Options) error {
	d, err := newDocument(sol, opt)
	if err != nil {
		return err
	}
	var buf bytes.Buffer
	fmt.Fprintf(&buf, "# %s\n\n", mdEscape(d.Title))
	buf.WriteString("## Model\n\n")
	mdTable(&buf, &d.Model, false)
	mdList(&buf, d.Facts, "- ")
	buf.WriteString("## Guarantee\n\n")
	mdList(&buf, d.Cert, "- ")
	fmt.Fprintf(&buf, "> **Caution.** %s\n\n", mdEscape(d.Caution))
	buf.WriteString("## How to use\n\n")
	for i, s := range d.Steps {
		fmt.Fprintf(&buf, "%d. %s\n", i+1, mdEscape(s))
	}
	buf.WriteString("\n")
	if d.Below != nil {
		mdTable(&buf, d.Below, true)
	}
	buf.WriteString("## Tables\n\n")
	for _, s := range d.Sections {
		fmt.Fprintf(&buf, "### %s\n\n", mdEscape(s.Title))
		for _, p := range s.Intro {
			fmt.Fprintf(&buf, "%s\n\n", mdEscape(p))
		}
		mdTable(&buf, &s.Table, true)
		mdList(&buf, s.Notes, "- ")
	}
	return flush(w, &buf)
}

// mdTable writes g as a pipe table followed by a blank line; numeric
// aligns the row headers right and centres grid entries; otherwise every
// column is left aligned.
func mdTable(buf *bytes.Buffer, g *grid, numeric bool) {
	nh := 1
	if len(g.Rows) > 0 {
		nh = len(g.Rows[0].Heads)
	}
	buf.WriteString("|")
	for _, h := range g.Head {
		fmt.Fprintf(buf, " %s |", mdEscape(h))
	}
	buf.WriteString("\n|")
	for i := range g.Head {
		switch {
		case !numeric:
			buf.WriteString(":---|")
		case i < nh:
			buf.WriteString("---:|")
		case len(g.Head)-nh > 1:
			buf.WriteString(":---:|")
		default:
			buf.WriteString(":---|")
		}
	}
	buf.WriteString("\n")
	for _, r := range g.Rows {
		buf.WriteString("|")
		for _, h := range r.Heads {
			fmt.Fprintf(buf, " %s |", mdEscape(h))
		}
		for _, e := range r.Entries {
			fmt.Fprintf(buf, " %s |", mdEscape(e.Text))
		}
		buf.WriteString("\n")
	}
	buf.WriteString("\n")
}

// mdList writes items as a list followed by a blank line.
func mdList(buf *bytes.Buffer, items []string, mark string) {
	if len(items) == 0 {
		return
	}
	for _, s := range items {
		fmt.Fprintf(buf, "%s%s\n", mark, mdEscape(s))
	}
	buf.WriteString("\n")
}

// mdEscape makes s literal text in Markdown: it backslash-escapes the
// ASCII punctuation that starts emphasis, code, links, HTML, entities or
// table cells, and turns line breaks into spaces.
func mdEscape(s string) string {
	var b strings.Builder
	for _, r := range s {
		switch r {
		case '\\', '`', '*', '_', '[', ']', '<', '>', '|', '&', '#', '!', '~', '$':
			b.WriteByte('\\')
			b.WriteRune(r)
		case '\n', '\r', '\t':
			b.WriteByte(' ')
		default:
			b.WriteRune(r)
		}
	}
	return b.String()
}

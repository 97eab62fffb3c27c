package render

import (
	"bytes"
	"encoding/xml"
	"fmt"
	"io"
	"math/big"
	"strings"
	"testing"

	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/result"
)

// tablesByTitle maps "Group X+Y" (procedure labels) to the table with
// cells.
func tablesByTitle(sol *result.Solution) map[string]*tables.Table {
	lab := labels(sol.Model)
	out := map[string]*tables.Table{}
	for _, t := range sol.Tables.Tables {
		if len(t.Cells) == 0 {
			continue
		}
		var s []string
		for _, ch := range t.Members {
			s = append(s, lab[ch])
		}
		out["Group "+strings.Join(s, "+")] = t
	}
	return out
}

// mdCells counts the entries of each group section's table in Markdown
// that are table cells: every entry after the row headers (one column of
// them, or |group| - 1 for a list) that is neither in parentheses (forced)
// nor "–" (readings of another group).
func mdCells(t *testing.T, md string) map[string]int {
	t.Helper()
	out := map[string]int{}
	title := ""
	heads := 0
	rows := 0 // table lines seen in the current section
	for _, line := range strings.Split(md, "\n") {
		if strings.HasPrefix(line, "#") {
			title, rows = "", 0
			if strings.HasPrefix(line, "### Group ") {
				title = strings.TrimPrefix(line, "### ")
				out[title] = 0
				heads = 1
				if m := strings.Count(title, "+") + 1; m >= 4 {
					heads = m - 1
				}
			}
			continue
		}
		if title == "" || !strings.HasPrefix(line, "|") {
			continue
		}
		rows++
		if rows <= 2 { // header and alignment lines
			continue
		}
		fields := splitRow(line)
		for _, f := range fields[heads:] {
			if f != "–" && !strings.HasPrefix(f, "(") {
				out[title]++
			}
		}
	}
	return out
}

// splitRow splits a pipe-table row into its trimmed cells, honouring
// backslash escapes.
func splitRow(line string) []string {
	var out []string
	var cur strings.Builder
	esc := false
	for _, r := range strings.TrimSpace(line)[1:] {
		switch {
		case esc:
			cur.WriteRune(r)
			esc = false
		case r == '\\':
			esc = true
		case r == '|':
			out = append(out, strings.TrimSpace(cur.String()))
			cur.Reset()
		default:
			cur.WriteRune(r)
		}
	}
	return out
}

// htmlDoc is what the tests read from an HTML procedure.
type htmlDoc struct {
	cells   map[string]int // td.cell elements per section title
	text    string         // all character data
	tags    map[string]int // element counts by name
	modelTD [][]string     // the model table's rows, header cells included
}

// parseHTML parses the procedure with encoding/xml in its HTML mode (no new
// dependency) and checks that every element is closed in order.
func parseHTML(t *testing.T, b []byte) htmlDoc {
	t.Helper()
	d := xml.NewDecoder(bytes.NewReader(b))
	d.Strict = false
	d.AutoClose = xml.HTMLAutoClose
	d.Entity = xml.HTMLEntity
	doc := htmlDoc{cells: map[string]int{}, tags: map[string]int{}}
	var stack []string
	var text strings.Builder
	section, inH3, inModel := "", false, false
	var h3 strings.Builder
	for {
		tok, err := d.Token()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("html does not parse: %v", err)
		}
		switch x := tok.(type) {
		case xml.StartElement:
			name := x.Name.Local
			stack = append(stack, name)
			doc.tags[name]++
			class := ""
			for _, a := range x.Attr {
				if a.Name.Local == "class" {
					class = a.Value
				}
			}
			switch {
			case name == "h3":
				inH3 = true
				h3.Reset()
			case name == "table" && class == "model":
				inModel = true
			case name == "tr" && inModel:
				doc.modelTD = append(doc.modelTD, nil)
			case name == "td" && class == "cell":
				doc.cells[section]++
			}
		case xml.EndElement:
			name := x.Name.Local
			if len(stack) == 0 || stack[len(stack)-1] != name {
				t.Fatalf("html: </%s> closes %v", name, stack)
			}
			stack = stack[:len(stack)-1]
			switch name {
			case "h3":
				inH3 = false
				section = h3.String()
			case "table":
				inModel = false
			}
		case xml.CharData:
			text.Write(x)
			if inH3 {
				h3.Write(x)
			}
			if inModel && len(doc.modelTD) > 0 && len(stack) > 0 && (stack[len(stack)-1] == "td" || stack[len(stack)-1] == "th") {
				r := &doc.modelTD[len(doc.modelTD)-1]
				*r = append(*r, string(x))
			}
		}
	}
	if len(stack) != 0 {
		t.Fatalf("html: unclosed elements %v", stack)
	}
	doc.text = text.String()
	return doc
}

// TestProcedureCells checks that the Markdown and HTML procedures hold one
// row or grid entry per table cell, in the section of its group, for 2-,
// 3- and 4-channel models (pairs, grids and lists).
func TestProcedureCells(t *testing.T) {
	for _, s := range solutions(t) {
		t.Run(s.name, func(t *testing.T) {
			pr, err := Round(s.sol)
			if err != nil {
				t.Fatal(err)
			}
			want := map[string]int{}
			for title, tab := range tablesByTitle(s.sol) {
				want[title] = len(tab.Cells)
			}
			var md, html bytes.Buffer
			if err := Markdown(&md, s.sol, Options{Printed: pr}); err != nil {
				t.Fatal(err)
			}
			if err := HTML(&html, s.sol, Options{Printed: pr}); err != nil {
				t.Fatal(err)
			}
			got := mdCells(t, md.String())
			if fmt.Sprint(got) != fmt.Sprint(want) {
				t.Errorf("markdown cells per group %v, want %v", got, want)
			}
			doc := parseHTML(t, html.Bytes())
			if fmt.Sprint(doc.cells) != fmt.Sprint(want) {
				t.Errorf("html cells per group %v, want %v", doc.cells, want)
			}
		})
	}
}

// TestHTMLDocument checks the HTML procedure of a model whose channel
// names and unit need escaping: it parses, is self-contained, carries the
// caution and the certificate, and shows the names as text.
func TestHTMLDocument(t *testing.T) {
	sol := solve(t, "two", twoChannel)
	sol2 := *sol
	m := *sol.Model
	m.Unit = `<i>dB</i> & "more"`
	sol2.Model = &m
	var buf bytes.Buffer
	if err := HTML(&buf, &sol2, Options{Title: "Probe <selection>"}); err != nil {
		t.Fatal(err)
	}
	doc := parseHTML(t, buf.Bytes())
	for _, tag := range []string{"script", "link", "img", "iframe", "object", "i", "ref", "selection", "font"} {
		if doc.tags[tag] != 0 {
			t.Errorf("%d <%s> elements", doc.tags[tag], tag)
		}
	}
	if doc.tags["style"] != 1 || doc.tags["table"] < 2 {
		t.Errorf("elements %v: want one style and the tables", doc.tags)
	}
	for _, s := range []string{"url(", "@import", "http:", "https:"} {
		if bytes.Contains(buf.Bytes(), []byte(s)) {
			t.Errorf("html refers to an external resource: %q", s)
		}
	}
	text := strings.Join(strings.Fields(doc.text), " ")
	for _, s := range []string{
		"Caution.",
		"noise model listed here and about nothing else",
		"calibration",
		"codes, standards or accepted practices of your field",
		"certified in exact arithmetic",
		"Probe <selection>",
		`<i>dB</i> & "more"`,
	} {
		if !strings.Contains(text, s) {
			t.Errorf("html text lacks %q", s)
		}
	}
	var names []string
	for _, row := range doc.modelTD[1:] {
		names = append(names, row[1])
	}
	if want := []string{"reference <ref> & co", "probe|2"}; fmt.Sprint(names) != fmt.Sprint(want) {
		t.Errorf("model table names %q, want %q", names, want)
	}
	for _, s := range []string{"@page", "break-inside: avoid", "color: #000", "background: #fff"} {
		if !bytes.Contains(buf.Bytes(), []byte(s)) {
			t.Errorf("style lacks %q", s)
		}
	}
}

// TestMarkdownEscapes checks that the channel names of the two-channel
// model survive as literal text in Markdown.
func TestMarkdownEscapes(t *testing.T) {
	sol := solve(t, "two", twoChannel)
	var buf bytes.Buffer
	if err := Markdown(&buf, sol, Options{}); err != nil {
		t.Fatal(err)
	}
	for _, s := range []string{`| A | reference \<ref\> \& co |`, `| B | probe\|2 |`} {
		if !strings.Contains(buf.String(), s) {
			t.Errorf("markdown lacks %q", s)
		}
	}
}

// TestPrintedRegret checks the rounded table and its certificate on every
// test model: probabilities are whole hundredths summing to 1 per cell,
// nothing goes to a channel certainly below another, no probability moves
// by more than 1/100, and the exact worst case of the rounded table is at
// least the certified optimum (no rule beats it) and at most the LP
// optimum plus 0.01.
func TestPrintedRegret(t *testing.T) {
	for _, s := range solutions(t) {
		t.Run(s.name, func(t *testing.T) {
			pr, err := Round(s.sol)
			if err != nil {
				t.Fatal(err)
			}
			if err := pr.Tables.Check(1e-12); err != nil {
				t.Fatal(err)
			}
			for ti, tab := range pr.Tables.Tables {
				orig := s.sol.Tables.Tables[ti]
				for ci, c := range tab.Cells {
					sum := 0
					for k, q := range nums(c.P) {
						sum += q
						if d := c.P[k] - orig.Cells[ci].P[k]; d > 0.01 || d < -0.01 {
							t.Errorf("group %v cell %v: %v rounded to %v", tab.Members, c.Diff, orig.Cells[ci].P[k], c.P[k])
						}
					}
					if sum != Den {
						t.Errorf("group %v cell %v: numerators sum to %d", tab.Members, c.Diff, sum)
					}
				}
			}
			if pr.Regret.Cmp(s.sol.Lower) < 0 {
				t.Errorf("printed regret %s below the certified lower bound %s", pr.Regret.FloatString(9), s.sol.Lower.FloatString(9))
			}
			step := s.sol.Model.Step
			gap := new(big.Rat).Sub(result.Units(pr.Regret, step), result.Units(s.sol.Upper, step))
			if result.Float(gap) > 0.01 {
				t.Errorf("rounding costs %v > 0.01", result.Float(gap))
			}
			t.Logf("optimum in [%.9g, %.9g], printed %.9g (units)", result.Float(result.Units(s.sol.Lower, step)),
				result.Float(result.Units(s.sol.Upper, step)), result.Float(result.Units(pr.Regret, step)))
		})
	}
}

// TestDeterministic renders every format twice, from scratch, and compares
// the bytes.
func TestDeterministic(t *testing.T) {
	formats := []struct {
		name   string
		render func(io.Writer, *result.Solution) error
	}{
		{"text", func(w io.Writer, s *result.Solution) error { return Text(w, s, Options{}) }},
		{"text ascii", func(w io.Writer, s *result.Solution) error { return Text(w, s, Options{ASCII: true}) }},
		{"csv", CSV},
		{"json", JSON},
		{"md", func(w io.Writer, s *result.Solution) error { return Markdown(w, s, Options{}) }},
		{"html", func(w io.Writer, s *result.Solution) error { return HTML(w, s, Options{}) }},
	}
	sols := solutions(t)
	for _, s := range sols[1:3] {
		for _, f := range formats {
			t.Run(s.name+"/"+f.name, func(t *testing.T) {
				var a, b bytes.Buffer
				if err := f.render(&a, s.sol); err != nil {
					t.Fatal(err)
				}
				if err := f.render(&b, s.sol); err != nil {
					t.Fatal(err)
				}
				if a.Len() == 0 || !bytes.Equal(a.Bytes(), b.Bytes()) {
					t.Errorf("two renderings differ (or are empty)")
				}
			})
		}
	}
}

// TestDecimal checks the directed decimal rounding of certified figures
// against values worked out by hand.
func TestDecimal(t *testing.T) {
	cases := []struct {
		name  string
		r     *big.Rat
		up    bool
		want  string
		exact bool
	}{
		{"quarter", big.NewRat(1, 4), true, "0.25", true},
		{"third up", big.NewRat(1, 3), true, "0.333334", false},
		{"third down", big.NewRat(1, 3), false, "0.333333", false},
		{"negative third up", big.NewRat(-1, 3), true, "-0.333333", false},
		{"large up", big.NewRat(123456789, 1), true, "123457000", false},
		{"small up", big.NewRat(123456789, 1e12), true, "0.000123457", false},
		{"power of ten", big.NewRat(1, 1000), false, "0.001", true},
		{"zero", new(big.Rat), true, "0", true},
		{"just below one, up", big.NewRat(9999999, 10000000), true, "1", false},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			got, exact := decimal(c.r, 6, c.up)
			if got != c.want || exact != c.exact {
				t.Errorf("decimal(%s) = %q, %v; want %q, %v", c.r.RatString(), got, exact, c.want, c.exact)
			}
		})
	}
}

// TestRoundCell checks largest-remainder rounding to hundredths on cells
// worked out by hand.
func TestRoundCell(t *testing.T) {
	cases := []struct {
		name string
		p    []float64
		want []int
	}{
		{"halves", []float64{0.5, 0.5}, []int{50, 50}},
		{"thirds, first wins the tie", []float64{1.0 / 3, 1.0 / 3, 1.0 / 3}, []int{34, 33, 33}},
		{"tiny goes to zero", []float64{0.004, 0.996}, []int{0, 100}},
		{"eighths tie", []float64{0.125, 0.875}, []int{13, 87}},
		{"larger remainder wins", []float64{0.374, 0.626}, []int{37, 63}},
		{"certainly below stays zero", []float64{0.255, 0, 0.745}, []int{26, 0, 74}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			got, err := roundCell(c.p)
			if err != nil {
				t.Fatal(err)
			}
			if fmt.Sprint(got) != fmt.Sprint(c.want) {
				t.Errorf("roundCell(%v) = %v, want %v", c.p, got, c.want)
			}
		})
	}
}

// TestTextRows checks that the terminal rendering has one data row per
// table cell: every table line that starts with a vertical bar, less one
// header line per table.
func TestTextRows(t *testing.T) {
	for _, s := range solutions(t) {
		t.Run(s.name, func(t *testing.T) {
			var buf bytes.Buffer
			if err := Text(&buf, s.sol, Options{ASCII: true}); err != nil {
				t.Fatal(err)
			}
			bars, groups := 0, 0
			for _, line := range strings.Split(buf.String(), "\n") {
				switch {
				case strings.HasPrefix(line, "|"):
					bars++
				case strings.HasPrefix(line, "group "):
					groups++
				}
			}
			if got, want := bars-groups, s.sol.Tables.NumCells(); got != want {
				t.Errorf("%d data rows, want %d cells", got, want)
			}
		})
	}
}

// TestProcedureOffsets: with offsets for missing cells the printed rule
// says how such readings choose, with each offset in reading units (half
// steps of 0.5 °C: 1 is +0.25 °C, -3 is -0.75 °C).
func TestProcedureOffsets(t *testing.T) {
	sol := withHalf(solve(t, "three", threeChannel), []int{1, -3, 0})
	var md bytes.Buffer
	if err := Markdown(&md, sol, Options{}); err != nil {
		t.Fatal(err)
	}
	for _, s := range []string{"the highest reading plus its offset (", "+0.25 °C", "-0.75 °C", "0 °C)"} {
		if !strings.Contains(md.String(), s) {
			t.Errorf("the procedure lacks %q", s)
		}
	}
	var plain bytes.Buffer
	if err := Markdown(&plain, solve(t, "three", threeChannel), Options{}); err != nil {
		t.Fatal(err)
	}
	if strings.Contains(plain.String(), "offset (") {
		t.Error("the procedure of tables without offsets mentions offsets")
	}
}

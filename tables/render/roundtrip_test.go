package render

import (
	"bytes"
	"io"
	"math"
	"slices"
	"strings"
	"testing"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/result"
)

// sameTables reports the first difference between two table rules: group
// order, members, and every cell's differences, alive set and
// probabilities, bit for bit.
func sameTables(t *testing.T, got, want *tables.Optimal) {
	t.Helper()
	if len(got.Tables) != len(want.Tables) {
		t.Fatalf("%d tables, want %d", len(got.Tables), len(want.Tables))
	}
	if !slices.Equal(got.Half, want.Half) || (got.Half == nil) != (want.Half == nil) {
		t.Fatalf("offsets of missing cells %v, want %v", got.Half, want.Half)
	}
	for i, w := range want.Tables {
		g := got.Tables[i]
		if g.Group != w.Group || len(g.Cells) != len(w.Cells) {
			t.Fatalf("table %d: group %v with %d cells, want %v with %d", i, g.Members, len(g.Cells), w.Members, len(w.Cells))
		}
		for c := range w.Cells {
			gc, wc := g.Cells[c], w.Cells[c]
			if gc.Alive != wc.Alive {
				t.Errorf("group %v cell %v: alive %v, want %v", w.Members, wc.Diff, gc.Alive.Members(), wc.Alive.Members())
			}
			for k := range wc.Diff {
				if gc.Diff[k] != wc.Diff[k] || math.Float64bits(gc.P[k]) != math.Float64bits(wc.P[k]) {
					t.Fatalf("group %v cell %d: diff %v p %v, want diff %v p %v", w.Members, c, gc.Diff, gc.P, wc.Diff, wc.P)
				}
			}
		}
	}
}

// fourChannel is a 4-channel model with 2- and 3-point pmfs; it solves in
// well under a second.
func fourChannel(t *testing.T) *discretize.Model {
	return &discretize.Model{Step: 1, Channels: []discretize.Channel{
		{Name: "A", Kind: discretize.KindExact, PMF: pmf(t, 0, 1)},
		{Name: "B", Kind: discretize.KindPMF, PMF: pmf(t, 0, 0.5, 0.5)},
		{Name: "C", Kind: discretize.KindPMF, PMF: pmf(t, -1, 0.3, 0.7)},
		{Name: "D", Kind: discretize.KindPMF, PMF: pmf(t, -1, 0.5, 0.5)},
	}}
}

// solutions returns the named solutions the format tests share: the worked
// example's hand-derived table and LP solutions of 2-, 3- and 4-channel
// models.
func solutions(t *testing.T) []struct {
	name string
	sol  *result.Solution
} {
	return []struct {
		name string
		sol  *result.Solution
	}{
		{"worked example, step 1/2, by hand", workedSolution(t, 2)},
		{"two channels, step 0.1", solve(t, "two", twoChannel)},
		{"three channels", solve(t, "three", threeChannel)},
		{"four channels", solve(t, "four", fourChannel)},
		{"three channels, offsets for missing cells", withHalf(solve(t, "three", threeChannel), []int{1, -3, 0})},
	}
}

// withHalf returns a copy of sol whose tables give missing cells the
// offsets half.
func withHalf(sol *result.Solution, half []int) *result.Solution {
	s := *sol
	o := *sol.Tables
	o.Half = half
	s.Tables = &o
	return &s
}

// TestHalfErrors: offsets of missing cells that do not fit the model, or
// that differ between CSV records, are refused with a message naming them.
func TestHalfErrors(t *testing.T) {
	sol := withHalf(solve(t, "three", threeChannel), []int{1, -3, 0})
	var csvBuf, jsonBuf bytes.Buffer
	if err := CSV(&csvBuf, sol); err != nil {
		t.Fatal(err)
	}
	if err := JSON(&jsonBuf, sol); err != nil {
		t.Fatal(err)
	}
	lines := strings.SplitAfter(csvBuf.String(), "\n")
	if len(lines) < 4 || !strings.HasSuffix(lines[2], ",1,-3,0\n") {
		t.Fatalf("csv records do not end with the offsets: %q", lines[:min(3, len(lines))])
	}
	changed := lines[0] + lines[1] + strings.TrimSuffix(lines[2], ",1,-3,0\n") + ",2,-3,0\n" + strings.Join(lines[3:], "")
	for _, tc := range []struct {
		name, format, text, want string
	}{
		{"csv offsets differ", "csv", changed, "differ from the first record's"},
		{"csv offset not an integer", "csv", strings.Replace(csvBuf.String(), ",1,-3,0\n", ",1,-3,x\n", 1), "is not an integer"},
		{"json too few offsets", "json", strings.Replace(jsonBuf.String(), `"missing_cell_half_steps":[1,-3,0]`, `"missing_cell_half_steps":[1,-3]`, 1), "2 offsets for 3 channels"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			read := ReadCSV
			if tc.format == "json" {
				read = ReadJSON
			}
			_, err := read(strings.NewReader(tc.text), sol.Model, sol.Layout)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("error %v, want one containing %q", err, tc.want)
			}
		})
	}
}

// TestRoundTrip writes the tables as CSV and JSON, reads them back and
// checks that the very same tables come back, and that writing the
// rebuilt tables gives the same bytes.
func TestRoundTrip(t *testing.T) {
	formats := []struct {
		name  string
		write func(io.Writer, *result.Solution) error
		read  func(io.Reader, *discretize.Model, *tables.Layout) (*tables.Optimal, error)
	}{
		{"csv", CSV, ReadCSV},
		{"json", JSON, ReadJSON},
	}
	for _, s := range solutions(t) {
		for _, f := range formats {
			t.Run(s.name+"/"+f.name, func(t *testing.T) {
				var buf bytes.Buffer
				if err := f.write(&buf, s.sol); err != nil {
					t.Fatal(err)
				}
				o, err := f.read(bytes.NewReader(buf.Bytes()), s.sol.Model, s.sol.Layout)
				if err != nil {
					t.Fatal(err)
				}
				sameTables(t, o, s.sol.Tables)
				again := *s.sol
				again.Tables = o
				var buf2 bytes.Buffer
				if err := f.write(&buf2, &again); err != nil {
					t.Fatal(err)
				}
				if !bytes.Equal(buf.Bytes(), buf2.Bytes()) {
					t.Errorf("writing the rebuilt tables gives different bytes")
				}
				// Without a layout, ReadCSV/ReadJSON compute it.
				o2, err := f.read(bytes.NewReader(buf.Bytes()), s.sol.Model, nil)
				if err != nil {
					t.Fatal(err)
				}
				sameTables(t, o2, s.sol.Tables)
			})
		}
	}
}

// TestReadErrors feeds ReadCSV and ReadJSON damaged versions of the worked
// example's tables (step 1/2: cells at r_B - r_A = -2..2 steps) and checks
// that each is refused with a message naming the problem.
func TestReadErrors(t *testing.T) {
	sol := workedSolution(t, 2)
	var csvBuf, jsonBuf bytes.Buffer
	if err := CSV(&csvBuf, sol); err != nil {
		t.Fatal(err)
	}
	if err := JSON(&jsonBuf, sol); err != nil {
		t.Fatal(err)
	}
	good := map[string]string{"csv": csvBuf.String(), "json": jsonBuf.String()}
	cases := []struct {
		name, format string
		old, new     string // replace old by new, once
		want         string // in the error
	}{
		{"csv header", "csv", "p:A,p:B", "p:A,p:X", `want "p:B"`},
		{"csv units disagree with steps", "csv", "A+B,0,-1,0.0,-0.5,", "A+B,0,-1,0.0,-0.4,", "is not -1 steps"},
		{"csv probabilities do not sum to 1", "csv", "A+B,0,0,0.0,0.0,0.5,0.5", "A+B,0,0,0.0,0.0,0.5,0.25", "sum to 0.75"},
		{"csv fraction accepted, bad sum", "csv", "A+B,0,0,0.0,0.0,0.5,0.5", "A+B,0,0,0.0,0.0,1/2,1/3", "sum to"},
		{"csv forced cell", "csv", "A+B,0,2,0.0,1.0,0,1", "A+B,0,3,0.0,1.5,0,1", "forced"},
		{"csv duplicate cell", "csv", "A+B,0,2,0.0,1.0,0,1", "A+B,0,1,0.0,0.5,0,1", "twice"},
		{"csv group name", "csv", "A+B,0,2,", "B+A,0,2,", "does not match"},
		{"csv first difference", "csv", "A+B,0,2,0.0,1.0,0,1", "A+B,1,2,0.5,1.0,0,1", "difference 0"},
		{"csv half a channel", "csv", "A+B,0,2,0.0,1.0,0,1", "A+B,0,2,,1.0,0,1", "all present or all empty"},
		{"csv probability out of range", "csv", "A+B,0,0,0.0,0.0,0.5,0.5", "A+B,0,0,0.0,0.0,-0.5,1.5", "not in [0, 1]"},
		{"csv beyond the table", "csv", "A+B,0,2,0.0,1.0,0,1", "A+B,0,99,0.0,49.5,0,1", "beyond the table"},
		{"json format", "json", CellsFormat, "pickwise-cells/0", "format"},
		{"json step", "json", `"step":"0.5"`, `"step":"0.25"`, "step"},
		{"json channel", "json", `"channels":["A","B"]`, `"channels":["A","C"]`, `channel 2 is "C"`},
		{"json unknown channel in a cell", "json", `{"group":["A","B"],"diff_steps":[0,-2]`, `{"group":["A","X"],"diff_steps":[0,-2]`, `unknown channel "X"`},
		{"json lengths", "json", `"p":[1,0]}`, `"p":[1]}`, "differ in length"},
		{"json unknown field", "json", `"unit":"mm"`, `"unit":"mm","extra":1`, "unknown field"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			in := good[c.format]
			if !strings.Contains(in, c.old) {
				t.Fatalf("test input lacks %q", c.old)
			}
			in = strings.Replace(in, c.old, c.new, 1)
			var err error
			if c.format == "csv" {
				_, err = ReadCSV(strings.NewReader(in), sol.Model, sol.Layout)
			} else {
				_, err = ReadJSON(strings.NewReader(in), sol.Model, sol.Layout)
			}
			if err == nil {
				t.Fatalf("no error for\n%s", in)
			}
			if !strings.Contains(err.Error(), c.want) {
				t.Errorf("error %q lacks %q", err, c.want)
			}
		})
	}
}

// TestReadCertainlyBelow checks that a cell giving probability to a channel
// certainly below another is refused. In the three-channel model (A exact,
// B and C with noise in [-1, 1] steps, T = 6 steps) the readings A = 0,
// B = -7, C = -1 steps form the group A+B+C (sorted gaps 1 and 6 <= T),
// and B is certainly below A: r_A - r_B = 7 > hi_A - lo_B = 1, while C is
// not (r_A - r_C = 1 is not > 1).
func TestReadCertainlyBelow(t *testing.T) {
	m := threeChannel(t)
	head := "group,d_steps:A,d_steps:B,d_steps:C,d_units:A,d_units:B,d_units:C,p:A,p:B,p:C\n"
	cases := []struct {
		name, row, want string
	}{
		{"probability on the alive channels", "A+B+C,0,-7,-1,0.0,-3.5,-0.5,0.5,0,0.5\n", ""},
		{"probability on B", "A+B+C,0,-7,-1,0.0,-3.5,-0.5,0.5,0.5,0\n", `"B" is certainly below another`},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			o, err := ReadCSV(strings.NewReader(head+c.row), m, nil)
			if c.want == "" {
				if err != nil {
					t.Fatal(err)
				}
				tab := o.Table(tables.SetOf(0, 1, 2))
				if len(tab.Cells) != 1 || tab.Cells[0].Alive != tables.SetOf(0, 2) {
					t.Errorf("cells %+v, want one with alive A and C", tab.Cells)
				}
				return
			}
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("error %v, want one containing %q", err, c.want)
			}
		})
	}
}

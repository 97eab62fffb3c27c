package render

import (
	"bytes"
	"flag"
	"math/big"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables/result"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata")

// mdSection returns the lines of the Markdown section headed "### title",
// up to the next heading.
func mdSection(t *testing.T, md, title string) []string {
	t.Helper()
	var out []string
	in := false
	for _, line := range strings.Split(md, "\n") {
		if strings.HasPrefix(line, "#") {
			if in {
				break
			}
			in = line == "### "+title
			continue
		}
		if in && line != "" {
			out = append(out, line)
		}
	}
	if !in && out == nil {
		t.Fatalf("no section %q", title)
	}
	return out
}

// TestWorkedExampleRows checks the printed procedure of the worked example
// (channel A exact, channel B with noise -1 or +1 reading units, 1/2 each;
// optimum 1/4, table derived by hand in workedSolution) at steps 1 and
// 1/2: one row per reading difference in the uncertain range, forced lines
// outside it, and the exact certified regret of what is printed.
func TestWorkedExampleRows(t *testing.T) {
	const half = "choose B with probability 0.5: draw a number from 1 to 100; 1 to 50 choose B, otherwise A"
	cases := []struct {
		name string
		k    int // step 1/k
		want []string
	}{
		{"step 1", 1, []string{
			"| r(B) − r(A) (mm) | choice |",
			"|---:|:---|",
			"| -1 | choose A |",
			"| 0 | " + half + " |",
			"| 1 | choose B |",
			"- r(B) − r(A) ≤ -2 mm: choose A.",
			"- r(B) − r(A) ≥ 2 mm: choose B.",
		}},
		{"step 1/2", 2, []string{
			"| r(B) − r(A) (mm) | choice |",
			"|---:|:---|",
			"| -1.0 | choose A |",
			"| -0.5 | choose A |",
			"| 0.0 | " + half + " |",
			"| 0.5 | choose B |",
			"| 1.0 | choose B |",
			"- r(B) − r(A) ≤ -1.5 mm: choose A.",
			"- r(B) − r(A) ≥ 1.5 mm: choose B.",
		}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			sol := workedSolution(t, c.k)
			pr, err := Round(sol)
			if err != nil {
				t.Fatal(err)
			}
			// The hand-derived optimum is 1/4 reading units; the table has
			// probabilities 0, 1/2 and 1, which rounding to hundredths
			// leaves alone, so the printed table is certified at exactly
			// 1/4.
			if got := result.Units(pr.Regret, sol.Model.Step); got.Cmp(big.NewRat(1, 4)) != 0 {
				t.Errorf("printed worst-case regret %s, want 1/4 (derived by hand)", got.RatString())
			}
			var buf bytes.Buffer
			if err := Markdown(&buf, sol, Options{Printed: pr}); err != nil {
				t.Fatal(err)
			}
			got := mdSection(t, buf.String(), "Group A+B")
			if strings.Join(got, "\n") != strings.Join(c.want, "\n") {
				t.Errorf("section Group A+B:\n%s\nwant:\n%s", strings.Join(got, "\n"), strings.Join(c.want, "\n"))
			}
			for _, s := range []string{
				"certified in exact arithmetic: 0.25 mm.",
				"certified exactly: 0.25 mm.",
				"the printed procedure is optimal.",
			} {
				if !strings.Contains(buf.String(), s) {
					t.Errorf("markdown lacks %q", s)
				}
			}
		})
	}
}

// TestWorkedExampleSolved solves the worked example with the LP and checks
// the printed procedure against the hand derivation (optimum 1/4 at steps
// 1 and 1/2; the only forced randomization is 1/2 at r_B - r_A = 0): the
// exact worst case of the printed, rounded table is at least the LP optimum
// and within 0.01 of it.
func TestWorkedExampleSolved(t *testing.T) {
	cases := []struct {
		name string
		k    int
		row0 string // the row at r_B - r_A = 0
	}{
		{"step 1", 1, "| 0 | choose B with probability 0.5: draw a number from 1 to 100; 1 to 50 choose B, otherwise A |"},
		{"step 1/2", 2, "| 0.0 | choose B with probability 0.5: draw a number from 1 to 100; 1 to 50 choose B, otherwise A |"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			sol := solve(t, "worked "+c.name, func(t *testing.T) *discretize.Model { return workedModel(t, c.k) })
			pr, err := Round(sol)
			if err != nil {
				t.Fatal(err)
			}
			step := sol.Model.Step
			printed := result.Units(pr.Regret, step)
			quarter := big.NewRat(1, 4) // derived by hand
			if lo := result.Units(sol.Lower, step); lo.Cmp(quarter) > 0 || result.Units(sol.Upper, step).Cmp(quarter) < 0 {
				t.Fatalf("certified interval [%s, %s] misses the optimum 1/4", lo.RatString(), result.Units(sol.Upper, step).RatString())
			}
			if printed.Cmp(result.Units(sol.Lower, step)) < 0 {
				t.Errorf("printed regret %s is below the certified lower bound %s", printed.RatString(), result.Units(sol.Lower, step).RatString())
			}
			if f := result.Float(printed); f < sol.Objective*step-1e-12 || f > result.Float(result.Units(sol.Upper, step))+0.01 {
				t.Errorf("printed regret %v not in [LP optimum %v, optimum + 0.01]", f, sol.Objective*step)
			}
			var buf bytes.Buffer
			if err := Markdown(&buf, sol, Options{Printed: pr}); err != nil {
				t.Fatal(err)
			}
			found := false
			for _, line := range mdSection(t, buf.String(), "Group A+B") {
				found = found || line == c.row0
			}
			if !found {
				t.Errorf("no row %q in\n%s", c.row0, buf.String())
			}
		})
	}
}

// TestGolden compares every rendering of the worked example at step 1/2
// with the files in testdata, which were checked by hand against the
// derivation in workedSolution. Run with -update to rewrite them.
func TestGolden(t *testing.T) {
	sol := workedSolution(t, 2)
	pr, err := Round(sol)
	if err != nil {
		t.Fatal(err)
	}
	opt := Options{Printed: pr, Title: "Worked example"}
	formats := []struct {
		ext    string
		render func(*bytes.Buffer) error
	}{
		{"txt", func(b *bytes.Buffer) error { return Text(b, sol, opt) }},
		{"csv", func(b *bytes.Buffer) error { return CSV(b, sol) }},
		{"json", func(b *bytes.Buffer) error { return JSON(b, sol) }},
		{"md", func(b *bytes.Buffer) error { return Markdown(b, sol, opt) }},
		{"html", func(b *bytes.Buffer) error { return HTML(b, sol, opt) }},
	}
	for _, f := range formats {
		t.Run(f.ext, func(t *testing.T) {
			var buf bytes.Buffer
			if err := f.render(&buf); err != nil {
				t.Fatal(err)
			}
			path := filepath.Join("testdata", "worked-half."+f.ext)
			if *update {
				if err := result.WriteAtomic(path, buf.Bytes()); err != nil {
					t.Fatal(err)
				}
				return
			}
			want, err := os.ReadFile(path)
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.Equal(buf.Bytes(), want) {
				t.Errorf("%s differs from %s:\n%s", f.ext, path, buf.String())
			}
		})
	}
}

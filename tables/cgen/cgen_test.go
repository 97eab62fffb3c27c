package cgen

import (
	"bufio"
	"bytes"
	"fmt"
	"math"
	"math/big"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/result"
)

// strict are the compiler flags the generated code must pass.
var strict = []string{"-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic"}

func TestCheckPrefix(t *testing.T) {
	cases := []struct {
		name, prefix string
		ok           bool
	}{
		{"lower", "pick", true},
		{"mixed-digits-underscore", "Pick_2", true},
		{"one-letter", "p", true},
		{"longest", strings.Repeat("a", 24), true},
		{"empty", "", false},
		{"digit-first", "9pick", false},
		{"underscore-first", "_pick", false},
		{"hyphen", "pick-me", false},
		{"space", "pick me", false},
		{"non-ascii", "pické", false},
		{"too-long", strings.Repeat("a", 25), false},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			if err := CheckPrefix(c.prefix); (err == nil) != c.ok {
				t.Errorf("CheckPrefix(%q) = %v, want ok %v", c.prefix, err, c.ok)
			}
		})
	}
}

func TestDecimal(t *testing.T) {
	cases := []struct {
		name string
		r    *big.Rat
		sig  int
		up   bool
		want string
	}{
		{"third-down", big.NewRat(1, 3), 3, false, "0.333"},
		{"third-up", big.NewRat(1, 3), 3, true, "0.334"},
		{"quarter-exact", big.NewRat(1, 4), 9, true, "0.25"},
		{"integer-up", big.NewRat(12345, 1), 3, true, "12400"},
		{"integer-down", big.NewRat(12345, 1), 3, false, "12300"},
		{"small", big.NewRat(1, 3000000), 2, false, "0.00000033"},
		{"power-of-ten", big.NewRat(1, 100), 3, true, "0.01"},
		{"negative-down", big.NewRat(-1, 3), 3, false, "-0.334"},
		{"negative-up", big.NewRat(-1, 3), 3, true, "-0.333"},
		{"zero", new(big.Rat), 3, true, "0"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			if got := decimal(c.r, c.sig, c.up); got != c.want {
				t.Errorf("decimal(%v, %d, %v) = %q, want %q", c.r, c.sig, c.up, got, c.want)
			}
		})
	}
}

func TestCText(t *testing.T) {
	cases := []struct{ name, in, want string }{
		{"plain", "chan 1", "chan 1"},
		{"comment-end", "a*/b", `a\x2a\x2fb`},
		{"comment-start", "a/*b", `a\x2f\x2ab`},
		{"trigraph", "??/", `\x3f\x3f\x2f`},
		{"quote-backslash", `"\`, `\x22\x5c`},
		{"newline", "a\nb", `a\x0ab`},
		{"non-ascii", "é", `\u00e9`},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			if got := cText(c.in); got != c.want {
				t.Errorf("cText(%q) = %q, want %q", c.in, got, c.want)
			}
		})
	}
}

func TestGenerateErrors(t *testing.T) {
	sol := solve(t, "two")
	noBounds := *sol
	noBounds.Lower = nil
	cases := []struct {
		name   string
		sol    *result.Solution
		prefix string
		opt    Options
	}{
		{"bad-prefix", sol, "2pick", Options{}},
		{"empty-prefix", sol, "", Options{}},
		{"nil-solution", nil, "pick", Options{}},
		{"no-bounds", &noBounds, "pick", Options{}},
		{"bad-index", sol, "pick", Options{Index: Index(7)}},
		{"bad-header-name", sol, "pick", Options{HeaderName: "a\"b.h"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			if _, err := Generate(c.sol, c.prefix, c.opt); err == nil {
				t.Error("Generate succeeded")
			}
		})
	}
}

// TestHeader checks that the header states the model, the exact figures
// and the caution, and declares the prefixed names.
func TestHeader(t *testing.T) {
	sol := solve(t, "three")
	code, err := Generate(sol, "pw_sel", Options{})
	if err != nil {
		t.Fatal(err)
	}
	h, s := string(code.Header), string(code.Source)
	want := []string{
		"#ifndef PW_SEL_H",
		"#include <stdint.h>",
		"#define PW_SEL_N 3",
		"int pw_sel_choose(const int32_t readings[PW_SEL_N], uint16_t u);",
		"Step 1 dB",
		`1 "b": pmf noise, offsets -2 dB .. 2 dB (-2 .. 2 steps)`,
		`2 "c": pmf noise, offsets -1 dB .. 2 dB (-1 .. 2 steps)`,
		decimal(code.Info.RegretUnits, 9, true) + " dB",
		"[" + decimal(sol.Lower, 9, false) + ", " + decimal(sol.Upper, 9, true) + "] dB",
		"holds only for the noise model",
		"codes and practices of your field",
		"c = pw_sel_choose(r, u);",
	}
	for _, w := range want {
		if !strings.Contains(h, w) {
			t.Errorf("header lacks %q", w)
		}
	}
	if !strings.Contains(s, `#include "pw_sel.h"`) {
		t.Error("source does not include the header")
	}
	if code.HeaderName != "pw_sel.h" || code.SourceName != "pw_sel.c" {
		t.Errorf("file names %q, %q", code.HeaderName, code.SourceName)
	}
	if code.Info.Regret.Cmp(sol.Lower) < 0 {
		t.Errorf("stated worst case %v below the lower bound %v", code.Info.Regret, sol.Lower)
	}
	t.Logf("info %+v", code.Info)
}

func TestDeterministic(t *testing.T) {
	sol := solve(t, "three")
	a, err := Generate(sol, "pick", Options{})
	if err != nil {
		t.Fatal(err)
	}
	b, err := Generate(sol, "pick", Options{})
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(a.Header, b.Header) || !bytes.Equal(a.Source, b.Source) {
		t.Error("two runs generate different code")
	}
}

// cc returns the C compiler, skipping the test when there is none.
func cc(t *testing.T) string {
	t.Helper()
	p, err := exec.LookPath("cc")
	if err != nil {
		t.Skip("no cc on PATH")
	}
	return p
}

var ubsan struct {
	once  sync.Once
	flags []string
}

// sanitize returns the flags that trap undefined behaviour (signed
// overflow, out-of-range shifts and indexes) when the compiler can link
// them, or none.
func sanitize(t *testing.T, compiler string) []string {
	ubsan.once.Do(func() {
		dir, err := os.MkdirTemp("", "cgen-ubsan")
		if err != nil {
			return
		}
		defer os.RemoveAll(dir)
		src := filepath.Join(dir, "a.c")
		if os.WriteFile(src, []byte("int main(void) { return 0; }\n"), 0o644) != nil {
			return
		}
		flags := []string{"-fsanitize=undefined", "-fno-sanitize-recover=all"}
		cmd := exec.Command(compiler, append(flags, "-o", filepath.Join(dir, "a"), src)...)
		if cmd.Run() == nil {
			ubsan.flags = flags
		}
	})
	if ubsan.flags == nil {
		t.Log("the compiler cannot link the undefined-behaviour sanitizer; building without it")
	}
	return ubsan.flags
}

// harnessMain reads lines of PREFIX_N readings and u from stdin and prints
// the chosen channel for each. It includes the header twice to check the
// include guard.
const harnessMain = `#include <stdio.h>
#include "%[1]s.h"
#include "%[1]s.h"

int main(void)
{
    long v;
    unsigned long u;
    int32_t r[%[2]s_N];
    int i;

    for (;;) {
        for (i = 0; i < %[2]s_N; i++) {
            if (scanf("%%ld", &v) != 1) {
                return 0;
            }
            r[i] = (int32_t)v;
        }
        if (scanf("%%lu", &u) != 1) {
            return 1;
        }
        printf("%%d\n", %[1]s_choose(r, (uint16_t)u));
    }
}
`

// build writes the code and the harness into a temporary directory,
// compiles the source alone with the strict flags, then the harness with
// it, and returns the harness executable.
func build(t *testing.T, code *Code, prefix string) string {
	t.Helper()
	compiler := cc(t)
	dir := t.TempDir()
	if err := code.WriteFiles(dir); err != nil {
		t.Fatal(err)
	}
	run := func(args ...string) {
		t.Helper()
		cmd := exec.Command(compiler, args...)
		cmd.Dir = dir
		if out, err := cmd.CombinedOutput(); err != nil {
			t.Fatalf("cc %s: %v\n%s", strings.Join(args, " "), err, out)
		}
	}
	t0 := time.Now()
	run(append(strict, "-c", code.SourceName, "-o", "gen.o")...)
	t.Logf("compiled %s (%d bytes) in %v", code.SourceName, len(code.Source), time.Since(t0))
	main := fmt.Sprintf(harnessMain, prefix, strings.ToUpper(prefix))
	if err := os.WriteFile(filepath.Join(dir, "main.c"), []byte(main), 0o644); err != nil {
		t.Fatal(err)
	}
	args := append(append([]string{}, strict...), "-O1")
	args = append(args, sanitize(t, compiler)...)
	run(append(args, "-o", "harness", "main.c", code.SourceName)...)
	return filepath.Join(dir, "harness")
}

// input is one call of the chooser.
type input struct {
	r []int32
	u uint16
}

// runHarness feeds inputs to the harness and returns its answers.
func runHarness(t *testing.T, exe string, in []input) []int {
	t.Helper()
	var b bytes.Buffer
	for _, x := range in {
		for _, r := range x.r {
			b.WriteString(strconv.FormatInt(int64(r), 10))
			b.WriteByte(' ')
		}
		b.WriteString(strconv.Itoa(int(x.u)))
		b.WriteByte('\n')
	}
	path := filepath.Join(filepath.Dir(exe), "input.txt")
	if err := os.WriteFile(path, b.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	cmd := exec.Command(exe)
	cmd.Stdin = f
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("harness: %v\n%s", err, stderr.Bytes())
	}
	got := make([]int, 0, len(in))
	sc := bufio.NewScanner(bytes.NewReader(out))
	for sc.Scan() {
		v, err := strconv.Atoi(sc.Text())
		if err != nil {
			t.Fatalf("harness output %q", sc.Text())
		}
		got = append(got, v)
	}
	if len(got) != len(in) {
		t.Fatalf("harness answered %d of %d inputs\n%s", len(got), len(in), stderr.Bytes())
	}
	return got
}

// cellInputs returns, for every cell of every table, readings that land in
// it (at translations from the middle to the ends of the int32 range, with
// the other channels far enough below to stay out of the group) and u at 0,
// 65535, both sides of every cumulative threshold and a few random values.
// It checks in Go that the readings locate the cell and that the reference
// chooser picks member i on both ends of its interval of u.
func cellInputs(t *testing.T, f *Fixed, rng *rand.Rand) []input {
	t.Helper()
	l := f.Table.Layout
	n := l.N()
	span := int64(l.T) * int64(n-1)
	var in []input
	for _, tab := range f.Table.Tables {
		for ci, c := range tab.Cells {
			var base int64
			switch ci % 4 {
			case 0:
				base = 0
			case 1:
				base = rng.Int64N(2_000_001) - 1_000_000
			case 2:
				base = math.MaxInt32 - span
			case 3:
				base = math.MinInt32 + 2*span + int64(l.T) + 10
			}
			r := make([]int32, n)
			ri := make([]int, n)
			low := int64(math.MaxInt64)
			for i, ch := range tab.Members {
				v := base + int64(c.Diff[i])
				r[ch], ri[ch] = int32(v), int(v)
				low = min(low, v)
			}
			for ch := 0; ch < n; ch++ {
				if !tab.Group.Has(ch) {
					v := low - int64(l.T) - 1 - rng.Int64N(3)
					r[ch], ri[ch] = int32(v), int(v)
				}
			}
			_, _, lt, lc := f.Table.Locate(ri)
			if lt != tab || lc != ci {
				t.Fatalf("readings %v do not locate group %v cell %v", r, tab.Members, c.Diff)
			}
			us := []uint16{0, math.MaxUint16}
			var cum uint32
			for i, q := range Numerators(c) {
				if q > 0 {
					if got := f.Choose(r, uint16(cum)); got != tab.Members[i] {
						t.Fatalf("group %v cell %v: u = %d picks %d, want %d", tab.Members, c.Diff, cum, got, tab.Members[i])
					}
					if got := f.Choose(r, uint16(cum+q-1)); got != tab.Members[i] {
						t.Fatalf("group %v cell %v: u = %d picks %d, want %d", tab.Members, c.Diff, cum+q-1, got, tab.Members[i])
					}
				}
				cum += q
				if cum > 0 && cum < One {
					us = append(us, uint16(cum-1), uint16(cum))
				}
			}
			for k := 0; k < 3; k++ {
				us = append(us, uint16(rng.Uint32()))
			}
			for _, u := range us {
				in = append(in, input{r, u})
			}
		}
	}
	return in
}

// randomInputs returns count seeded random reading vectors with random u:
// seven in ten close together (within the tables' range), two in ten
// spread over several group gaps, one in ten from the extremes of int32.
func randomInputs(l *tables.Layout, rng *rand.Rand, count int) []input {
	n := l.N()
	near := int64(l.T)*int64(n-1)/2 + 2
	wide := 4 * int64(l.T) * int64(n)
	extremes := []int64{math.MinInt32, math.MinInt32 + 1, math.MaxInt32, math.MaxInt32 - 1, 0, -1,
		math.MaxInt32 - int64(l.T), math.MinInt32 + int64(l.T)}
	in := make([]input, count)
	for k := range in {
		r := make([]int32, n)
		base := rng.Int64N(200_001) - 100_000
		for i := range r {
			switch k % 10 {
			case 0, 1, 2, 3, 4, 5, 6:
				r[i] = int32(base + rng.Int64N(2*near+1) - near)
			case 7, 8:
				r[i] = int32(base + rng.Int64N(2*wide+1) - wide)
			default:
				if rng.IntN(3) == 0 {
					r[i] = int32(rng.Uint32())
				} else {
					r[i] = int32(extremes[rng.IntN(len(extremes))])
				}
			}
		}
		in[k] = input{r, uint16(rng.Uint32())}
	}
	return in
}

// edgeTables returns a copy of the tables of sol with cells set to
// patterns that stress the encoding: certainty on each member, mass only on
// leading members (cumulative 65536 before the last member), the smallest
// positive probability at either end. Every fifth cell is dropped, and
// every cell at the lowest difference of member 1, so that readings reach
// the rule for a missing cell on either side of a box.
func edgeTables(sol *result.Solution) *tables.Optimal {
	const u = 1.0 / One
	patterns := [][]float64{
		{1, 0, 0}, {0, 1, 0}, {0, 0, 1}, {0.5, 0.5, 0}, {0.5, 0, 0.5}, {0, 0.5, 0.5},
		{u, 1 - u, 0}, {1 - u, 0, u}, {0.25, 0.75, 0},
		{1, 0}, {0, 1}, {u, 1 - u}, {1 - u, u},
	}
	l := sol.Layout
	out := tables.NewOptimal(l)
	k := 0
	for ti, tab := range sol.Tables.Tables {
		low := math.MaxInt
		for _, c := range tab.Cells {
			low = min(low, c.Diff[1])
		}
		for ci, c := range tab.Cells {
			if ci%5 == 4 || c.Diff[1] == low {
				continue
			}
			p := c.P
			for try := 0; try < len(patterns); try++ {
				q := patterns[(k+try)%len(patterns)]
				fits := len(q) == len(c.P)
				for i := range q {
					fits = fits && (q[i] == 0 || c.Alive.Has(tab.Members[i]))
				}
				if fits {
					p = q
					k++
					break
				}
			}
			r := make([]int, l.N())
			for i, ch := range tab.Members {
				r[ch] = c.Diff[i]
			}
			out.Tables[ti].Add(r, c.Alive, p)
		}
	}
	return out
}

// TestCAgreesWithGo builds the generated code with a harness and checks
// that it picks the same channel as the reference chooser on every cell at
// every threshold of u and on 100,000 random inputs.
func TestCAgreesWithGo(t *testing.T) {
	cases := []struct {
		name, model, prefix string
		index               Index
		edge, empty         bool
		random              int
		half                []int // offsets of missing cells
	}{
		{"two-auto", "two", "pick", IndexAuto, false, false, 100_000, nil},
		{"two-sorted", "two", "Pick2", IndexSorted, false, false, 100_000, nil},
		{"three-auto", "three", "pick", IndexAuto, false, false, 100_000, nil},
		{"three-dense", "three", "pw_sel", IndexDense, false, false, 100_000, nil},
		{"three-sorted", "three", "pw_sel", IndexSorted, false, false, 100_000, nil},
		{"three-edge-dense", "three", "edge", IndexDense, true, false, 20_000, nil},
		{"three-edge-sorted", "three", "edge", IndexSorted, true, false, 20_000, nil},
		// No cells at all: every pick is the rule for a missing cell, and
		// every array of the source is a placeholder.
		{"three-no-cells", "three", "none", IndexAuto, false, true, 20_000, nil},
		// Missing cells that pick by offsets, one of them odd (half a
		// step: ties between readings are impossible), and offsets as
		// large as the readings of the extremes.
		{"three-edge-offsets", "three", "off", IndexDense, true, false, 20_000, []int{3, -2, 0}},
		{"three-no-cells-offsets", "three", "off", IndexSorted, false, true, 20_000, []int{-7, 0, 4}},
		{"three-no-cells-large-offsets", "three", "off", IndexAuto, false, true, 20_000, []int{math.MaxInt32, 0, math.MinInt32}},
	}
	for ci, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			sol := solve(t, c.model)
			if c.edge || c.empty {
				e := *sol
				e.Tables = tables.NewOptimal(sol.Layout)
				if c.edge {
					e.Tables = edgeTables(sol)
				}
				e.Tables.Half = c.half
				sol = &e
			}
			t0 := time.Now()
			code, err := Generate(sol, c.prefix, Options{Index: c.index})
			if err != nil {
				t.Fatal(err)
			}
			genTime := time.Since(t0)
			if !slices.Equal(code.Fixed.Table.Half, c.half) {
				t.Fatalf("the fixed-point table has offsets %v, want %v", code.Fixed.Table.Half, c.half)
			}
			info := code.Info
			switch {
			case info.Cells != code.Fixed.Table.NumCells():
				t.Errorf("info counts %d cells, the table has %d", info.Cells, code.Fixed.Table.NumCells())
			case info.Dense+info.Sorted != info.Groups:
				t.Errorf("info: %d dense + %d sorted groups of %d", info.Dense, info.Sorted, info.Groups)
			case c.index == IndexDense && info.Sorted != 0, c.index == IndexSorted && info.Dense != 0:
				t.Errorf("index mode %d gave %d dense and %d sorted groups", c.index, info.Dense, info.Sorted)
			}
			if c.edge && (info.Forced == 0 || !hasWrappedRow(code.Fixed)) {
				t.Fatalf("edge tables lack a forced cell or a cumulative 65536 before the last member")
			}
			exe := build(t, code, c.prefix)
			rng := rand.New(rand.NewPCG(uint64(ci)+1, 20250601))
			in := cellInputs(t, code.Fixed, rng)
			nCell := len(in)
			in = append(in, randomInputs(sol.Layout, rng, c.random)...)
			t1 := time.Now()
			got := runHarness(t, exe, in)
			cTime := time.Since(t1)
			bad := 0
			for k, x := range in {
				if want := code.Fixed.Choose(x.r, x.u); got[k] != want {
					if bad < 10 {
						t.Errorf("readings %v, u %d: C picks %d, Go %d", x.r, x.u, got[k], want)
					}
					bad++
				}
			}
			if bad > 0 {
				t.Fatalf("%d of %d inputs disagree", bad, len(in))
			}
			t.Logf("%d cell inputs + %d random agree; generate %v, harness run %v; %d groups (%d dense), %d cells (%d forced), %d rows, %d data bytes",
				nCell, c.random, genTime, cTime, info.Groups, info.Dense, info.Cells, info.Forced, info.Rows, info.DataBytes)
		})
	}
}

// hasWrappedRow reports whether some randomized cell reaches a cumulative
// 65536 before its last member.
func hasWrappedRow(f *Fixed) bool {
	for _, tab := range f.Table.Tables {
		for _, c := range tab.Cells {
			q := Numerators(c)
			var cum uint32
			for i := 0; i < len(q)-1; i++ {
				cum += q[i]
				if cum == One && q[0] != One && q[i] != One {
					return true
				}
			}
		}
	}
	return false
}

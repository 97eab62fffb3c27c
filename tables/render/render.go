// Package render writes pickwise's decision tables for people and for
// programs: terminal tables (Text), one record per table cell (CSV, JSON,
// with parsers that rebuild the tables), and a printable procedure
// (Markdown, HTML) whose randomized choices are rounded to hundredths and
// whose worst-case regret is certified exactly for what is printed.
//
// Every function renders into memory and writes once, so a failed write
// leaves nothing half-written behind it in the caller's buffer, and the
// same solution always gives the same bytes.
package render

import (
	"bytes"
	"fmt"
	"io"
	"math"
	"math/big"
	"sort"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf8"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/result"
)

// Options control the human-readable renderings (Text, Markdown, HTML).
type Options struct {
	// ASCII draws Text tables with ASCII characters instead of box
	// drawing characters.
	ASCII bool
	// Title heads the Markdown and HTML documents; empty means
	// "Selection procedure".
	Title string
	// Printed is the rounded table of the solution as returned by Round;
	// nil means Markdown and HTML compute it (an exact worst-case
	// evaluation). Pass it when the caller needs it anyway.
	Printed *Printed
}

func (o Options) title() string {
	if o.Title == "" {
		return "Selection procedure"
	}
	return o.Title
}

// check reports whether sol holds what the renderers need.
func check(sol *result.Solution) error {
	switch {
	case sol == nil:
		return fmt.Errorf("render: nil solution")
	case sol.Model == nil || sol.Layout == nil || sol.Tables == nil:
		return fmt.Errorf("render: solution lacks its model, layout or tables")
	case len(sol.Model.Channels) != sol.Layout.N():
		return fmt.Errorf("render: model has %d channels, layout %d", len(sol.Model.Channels), sol.Layout.N())
	case !(sol.Model.Step > 0):
		return fmt.Errorf("render: step %v is not positive", sol.Model.Step)
	}
	return nil
}

// flush writes buf to w in one call.
func flush(w io.Writer, buf *bytes.Buffer) error {
	if _, err := w.Write(buf.Bytes()); err != nil {
		return fmt.Errorf("render: %w", err)
	}
	return nil
}

// names returns the channel names of m, in channel order.
func names(m *discretize.Model) []string {
	out := make([]string, len(m.Channels))
	for i, c := range m.Channels {
		out[i] = c.Name
	}
	return out
}

// groupNames returns the names of the members of t.
func groupNames(all []string, t *tables.Table) []string {
	out := make([]string, len(t.Members))
	for i, ch := range t.Members {
		out[i] = all[ch]
	}
	return out
}

// labels returns the short labels the procedure uses for the channels:
// the names themselves when every name is short (at most 3 characters, no
// spaces or control characters), else the letters A, B, C, ...
func labels(m *discretize.Model) []string {
	short := true
	for _, c := range m.Channels {
		if c.Name == "" || utf8.RuneCountInString(c.Name) > 3 || strings.IndexFunc(c.Name, func(r rune) bool {
			return unicode.IsSpace(r) || !unicode.IsGraphic(r)
		}) >= 0 {
			short = false
		}
	}
	out := make([]string, len(m.Channels))
	for i, c := range m.Channels {
		if short {
			out[i] = c.Name
		} else {
			out[i] = string(rune('A' + i))
		}
	}
	return out
}

// printable returns s, quoted when it holds characters that would disturb
// a terminal.
func printable(s string) string {
	if strings.IndexFunc(s, func(r rune) bool { return !unicode.IsGraphic(r) || r == utf8.RuneError }) >= 0 {
		return strconv.Quote(s)
	}
	return s
}

// units formats lattice quantities (whole steps) in reading units as exact
// decimals.
type units struct {
	step *big.Rat
	dec  int
	unit string
}

func newUnits(m *discretize.Model) units {
	s := strconv.FormatFloat(m.Step, 'f', -1, 64)
	dec := 0
	if i := strings.IndexByte(s, '.'); i >= 0 {
		dec = len(s) - i - 1
	}
	return units{step: result.StepRat(m.Step), dec: dec, unit: m.Unit}
}

// of returns k steps in reading units, exactly, without a unit.
func (u units) of(k int) string {
	r := new(big.Rat).Mul(big.NewRat(int64(k), 1), u.step)
	return r.FloatString(u.dec)
}

// ofHalf returns h half steps in reading units, signed ("+0.5", "-1",
// "0"), as an exact decimal.
func (u units) ofHalf(h int) string {
	r := new(big.Rat).Mul(big.NewRat(int64(h), 2), u.step)
	s := r.FloatString(u.dec + 1)
	if u.dec+1 > 0 {
		s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	}
	if r.Sign() > 0 {
		s = "+" + s
	}
	return s
}

// suffix returns " unit", or "" without a unit.
func (u units) suffix() string {
	if u.unit == "" {
		return ""
	}
	return " " + u.unit
}

// paren returns " (unit)", or "" without a unit.
func (u units) paren() string {
	if u.unit == "" {
		return ""
	}
	return " (" + u.unit + ")"
}

// sortedCells returns the cell indices of t ordered by their reading
// differences, lexicographically in member order.
func sortedCells(t *tables.Table) []int {
	idx := make([]int, len(t.Cells))
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(a, b int) bool {
		da, db := t.Cells[idx[a]].Diff, t.Cells[idx[b]].Diff
		for k := range da {
			if da[k] != db[k] {
				return da[k] < db[k]
			}
		}
		return false
	})
	return idx
}

// readings returns a reading vector of n channels with the members of t at
// the differences d (relative to the first member) and every other channel
// far below.
func readings(n int, t *tables.Table, d []int) []int {
	r := make([]int, n)
	for i := range r {
		r[i] = tables.Far
	}
	for k, ch := range t.Members {
		r[ch] = d[k]
	}
	return r
}

// decimal formats r to sig significant digits, rounded up (up) or down,
// with trailing zeros removed; exact reports whether no rounding took
// place.
func decimal(r *big.Rat, sig int, up bool) (s string, exact bool) {
	if r.Sign() == 0 {
		return "0", true
	}
	// k = floor(log10 |r|): estimated from the float64, then corrected.
	mag := new(big.Rat).Abs(r)
	f, _ := mag.Float64()
	k := 0
	if f > 0 && !math.IsInf(f, 0) {
		k = int(math.Floor(math.Log10(f)))
	}
	for pow10(k).Cmp(mag) > 0 {
		k--
	}
	for pow10(k+1).Cmp(mag) <= 0 {
		k++
	}
	places := sig - 1 - k
	scale := pow10(places)
	x := new(big.Rat).Mul(r, scale)
	q, m := new(big.Int).DivMod(x.Num(), x.Denom(), new(big.Int)) // floor
	if m.Sign() != 0 && up {
		q.Add(q, big.NewInt(1))
	}
	v := new(big.Rat).Quo(new(big.Rat).SetInt(q), scale)
	s = v.FloatString(max(places, 0))
	if strings.IndexByte(s, '.') >= 0 {
		s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	}
	return s, m.Sign() == 0
}

// pow10 returns 10^k as a rational, for any integer k.
func pow10(k int) *big.Rat {
	p := new(big.Int).Exp(big.NewInt(10), big.NewInt(int64(abs(k))), nil)
	if k < 0 {
		return new(big.Rat).SetFrac(big.NewInt(1), p)
	}
	return new(big.Rat).SetInt(p)
}

func abs(k int) int {
	if k < 0 {
		return -k
	}
	return k
}

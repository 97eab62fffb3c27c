package render

import (
	"fmt"
	"math"
	"math/big"
	"strconv"
	"strings"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables"
)

// builder rebuilds tables from cells read as text.
type builder struct {
	names []string
	step  float64
	l     *tables.Layout
	o     *tables.Optimal
}

// cellText is one cell as read: the members (channel indices, increasing)
// and, per member, the difference in steps and in units and the
// probability, as written. group, when not empty, must be the members'
// names joined by "+".
type cellText struct {
	group           string
	members         []int
	steps, units, p []string
}

func newBuilder(m *discretize.Model, l *tables.Layout) (*builder, error) {
	if m == nil {
		return nil, fmt.Errorf("render: nil model")
	}
	if !(m.Step > 0) || math.IsInf(m.Step, 0) {
		return nil, fmt.Errorf("render: step %v is not positive and finite", m.Step)
	}
	if l == nil {
		var err error
		if l, err = tables.NewLayout(m); err != nil {
			return nil, fmt.Errorf("render: %w", err)
		}
	}
	if l.N() != len(m.Channels) {
		return nil, fmt.Errorf("render: model has %d channels, layout %d", len(m.Channels), l.N())
	}
	return &builder{names: names(m), step: m.Step, l: l, o: tables.NewOptimal(l)}, nil
}

// add checks one cell and adds it to its table.
func (b *builder) add(c cellText) error {
	mem := c.members
	var nm []string
	for _, ch := range mem {
		nm = append(nm, b.names[ch])
	}
	g := strings.Join(nm, "+")
	if len(mem) < 2 {
		return fmt.Errorf("group %q: a table cell needs at least two channels", g)
	}
	if c.group != "" && c.group != g {
		return fmt.Errorf("group %q does not match the channels with entries (%s)", c.group, g)
	}
	for i := 1; i < len(mem); i++ {
		if mem[i] <= mem[i-1] {
			return fmt.Errorf("group %q: channels must be distinct and in channel order", g)
		}
	}
	n := b.l.N()
	r := make([]int, n)
	for i := range r {
		r[i] = tables.Far
	}
	p := make([]float64, len(mem))
	diff := make([]int, len(mem))
	for k, ch := range mem {
		d, err := strconv.Atoi(strings.TrimSpace(c.steps[k]))
		if err != nil {
			return fmt.Errorf("channel %q: difference in steps: %w", b.names[ch], err)
		}
		if span := b.l.T * (len(mem) - 1); d < -span || d > span {
			return fmt.Errorf("channel %q: difference %d steps is beyond the table's range [-%d, %d]", b.names[ch], d, span, span)
		}
		if k == 0 && d != 0 {
			return fmt.Errorf("channel %q: the first channel of a group has difference 0, not %d", b.names[ch], d)
		}
		x, err := strconv.ParseFloat(strings.TrimSpace(c.units[k]), 64)
		if err != nil {
			return fmt.Errorf("channel %q: difference in reading units: %w", b.names[ch], err)
		}
		if want := float64(d) * b.step; math.Abs(x-want) > 1e-9*math.Max(1, math.Abs(want)) {
			return fmt.Errorf("channel %q: difference %s in reading units is not %d steps of %v", b.names[ch], c.units[k], d, b.step)
		}
		if p[k], err = parseProb(c.p[k]); err != nil {
			return fmt.Errorf("channel %q: %w", b.names[ch], err)
		}
		r[ch], diff[k] = d, d
	}
	set := tables.SetOf(mem...)
	if top := b.l.TopGroup(r); top != set {
		return fmt.Errorf("group %s cell %v: these readings make channels %v the top group, so the cell is never used", g, diff, top.Members())
	}
	alive := b.l.Alive(set, r)
	if alive.Len() < 2 {
		return fmt.Errorf("group %s cell %v: a cell where only channel %q is not certainly below another is forced, not a table cell", g, diff, b.names[alive.Members()[0]])
	}
	var sum float64
	for k, ch := range mem {
		if p[k] != 0 && !alive.Has(ch) {
			return fmt.Errorf("channel %q is certainly below another in this cell but has probability %v", b.names[ch], p[k])
		}
		sum += p[k]
	}
	if math.Abs(sum-1) > 1e-9 {
		return fmt.Errorf("group %s cell %v: probabilities sum to %v, not 1", g, diff, sum)
	}
	t := b.o.Table(set)
	if t.Lookup(r) >= 0 {
		return fmt.Errorf("group %s cell %v: cell appears twice", g, diff)
	}
	t.Add(r, alive, p)
	return nil
}

func (b *builder) finish() (*tables.Optimal, error) { return b.o, nil }

// setHalf sets the offsets of readings without a cell, in half steps (nil:
// none).
func (b *builder) setHalf(half []int) error { return b.o.SetHalf(half, b.names) }

// parseProb reads a probability in [0, 1] written as a decimal or as a
// fraction "a/b".
func parseProb(s string) (float64, error) {
	s = strings.TrimSpace(s)
	var p float64
	if strings.Contains(s, "/") {
		r, ok := new(big.Rat).SetString(s)
		if !ok {
			return 0, fmt.Errorf("probability %q is not a number or fraction", s)
		}
		p, _ = r.Float64()
	} else {
		var err error
		if p, err = strconv.ParseFloat(s, 64); err != nil {
			return 0, fmt.Errorf("probability %q is not a number or fraction", s)
		}
	}
	if !(p >= 0 && p <= 1) {
		return 0, fmt.Errorf("probability %s is not in [0, 1]", s)
	}
	return p, nil
}

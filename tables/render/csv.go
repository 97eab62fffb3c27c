package render

import (
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"slices"
	"strconv"
	"strings"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/result"
)

// CSV writes the decision tables of sol as CSV (RFC 4180), one record per
// table cell. Groups come in the order of tables.Subsets, cells in the
// order their table holds them, so ReadCSV rebuilds the very same tables.
// For a model whose channels are named c_1, ..., c_n the columns are:
//
//	group          the names of the group's channels, in channel order,
//	               joined by "+" (for reading; membership is given by the
//	               columns below)
//	d_steps:c_i    r_i - r_first, the reading of channel c_i minus the
//	               reading of the group's first channel, in steps (an
//	               integer, 0 for the first channel); empty when c_i is
//	               not in the group
//	d_units:c_i    the same difference in reading units (steps times the
//	               step), as an exact decimal; empty when c_i is not in
//	               the group
//	p:c_i          the probability of picking c_i in this cell, as the
//	               shortest decimal that reads back as the exact float64
//	               (table probabilities are multiples of 2^-48, so this is
//	               exact); 0 for a channel certainly below another; empty
//	               when c_i is not in the group
//
//	half:c_i       present only when the tables have offsets: c_i's
//	               offset for readings not covered by a cell, in half
//	               steps, the same on every record
//
// all d_steps columns come first, then all d_units, then all p, then any
// half, each in channel order. Readings not covered by a cell pick, among
// the channels of the top group not certainly below another, the highest
// reading plus its offset (the highest 2*r_i/step + half_i; the highest
// reading without offsets), sharing a tie equally among the channels
// tied (tables.Fallback); with one such channel the choice is forced.
func CSV(w io.Writer, sol *result.Solution) error {
	if err := check(sol); err != nil {
		return err
	}
	m := sol.Model
	u := newUnits(m)
	nm := names(m)
	n := len(nm)
	var buf bytes.Buffer
	cw := csv.NewWriter(&buf)
	half := sol.Tables.Half
	if err := cw.Write(csvHeader(nm, half != nil)); err != nil {
		return fmt.Errorf("render: %w", err)
	}
	rec := make([]string, 1+3*n)
	for _, h := range half {
		rec = append(rec, strconv.Itoa(h))
	}
	for _, t := range sol.Tables.Tables {
		for _, c := range t.Cells {
			for i := range 1 + 3*n {
				rec[i] = ""
			}
			rec[0] = strings.Join(groupNames(nm, t), "+")
			for k, ch := range t.Members {
				rec[1+ch] = strconv.Itoa(c.Diff[k])
				rec[1+n+ch] = u.of(c.Diff[k])
				rec[1+2*n+ch] = strconv.FormatFloat(c.P[k], 'g', -1, 64)
			}
			if err := cw.Write(rec); err != nil {
				return fmt.Errorf("render: %w", err)
			}
		}
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return fmt.Errorf("render: %w", err)
	}
	return flush(w, &buf)
}

// csvHeader returns the CSV header for channels named nm.
func csvHeader(nm []string, half bool) []string {
	h := []string{"group"}
	prefixes := []string{"d_steps:", "d_units:", "p:"}
	if half {
		prefixes = append(prefixes, "half:")
	}
	for _, p := range prefixes {
		for _, name := range nm {
			h = append(h, p+name)
		}
	}
	return h
}

// ReadCSV reads tables written by CSV for model m, whose layout is l (nil:
// computed from m), and rebuilds them. The header must name m's channels
// in order; each record's difference in reading units must agree with its
// difference in steps; every cell must leave at least two channels of its
// group not certainly below another, have readings whose top group is its
// group, appear once, and hold probabilities in [0, 1] summing to 1
// (within 1e-9) with none on a channel certainly below another.
// Probabilities may also be written as fractions ("3/8").
func ReadCSV(r io.Reader, m *discretize.Model, l *tables.Layout) (*tables.Optimal, error) {
	b, err := newBuilder(m, l)
	if err != nil {
		return nil, err
	}
	n := len(b.names)
	cr := csv.NewReader(r)
	cr.FieldsPerRecord = 0 // every record as long as the header
	cr.ReuseRecord = true
	head, err := cr.Read()
	if err != nil {
		return nil, fmt.Errorf("render: csv header: %w", err)
	}
	withHalf := len(head) == 1+4*n
	if !withHalf && len(head) != 1+3*n {
		return nil, fmt.Errorf("render: csv header has %d columns, want %d (or %d with offsets)", len(head), 1+3*n, 1+4*n)
	}
	want := csvHeader(b.names, withHalf)
	var half []string // the offsets of the first record, as written
	for i := range want {
		if head[i] != want[i] {
			return nil, fmt.Errorf("render: csv header column %d is %q, want %q", i+1, head[i], want[i])
		}
	}
	for {
		rec, err := cr.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return nil, fmt.Errorf("render: csv: %w", err)
		}
		line, _ := cr.FieldPos(0)
		if withHalf {
			got := rec[1+3*n:]
			if half == nil {
				half = slices.Clone(got)
				h := make([]int, n)
				for ch, x := range half {
					if h[ch], err = strconv.Atoi(x); err != nil {
						return nil, fmt.Errorf("render: csv line %d: half:%s %q is not an integer", line, b.names[ch], x)
					}
				}
				if err := b.setHalf(h); err != nil {
					return nil, fmt.Errorf("render: csv line %d: %w", line, err)
				}
			} else if !slices.Equal(got, half) {
				return nil, fmt.Errorf("render: csv line %d: offsets %v differ from the first record's %v", line, got, half)
			}
		}
		var c cellText
		for ch := 0; ch < n; ch++ {
			s, un, p := rec[1+ch], rec[1+n+ch], rec[1+2*n+ch]
			if s == "" && un == "" && p == "" {
				continue
			}
			if s == "" || un == "" || p == "" {
				return nil, fmt.Errorf("render: csv line %d: channel %q: d_steps, d_units and p must be all present or all empty", line, b.names[ch])
			}
			c.members = append(c.members, ch)
			c.steps = append(c.steps, s)
			c.units = append(c.units, un)
			c.p = append(c.p, p)
		}
		c.group = rec[0]
		if err := b.add(c); err != nil {
			return nil, fmt.Errorf("render: csv line %d: %w", line, err)
		}
	}
	return b.finish()
}

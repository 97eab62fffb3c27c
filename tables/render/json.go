package render

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"math/big"
	"strconv"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/result"
)

// CellsFormat is the value of the format field of the JSON that JSON
// writes and ReadJSON reads. Version 2: readings without a cell share a
// tie equally (tables.Fallback), where version 1 gave it to the
// lowest-numbered channel.
const CellsFormat = "pickwise-cells/2"

// cellsFile is the JSON document of JSON and ReadJSON.
type cellsFile struct {
	Format   string   `json:"format"`
	Channels []string `json:"channels"`
	Step     string   `json:"step"`
	Unit     string   `json:"unit"`
	// MissingHalf: offsets of readings without a cell, in half steps.
	MissingHalf []int      `json:"missing_cell_half_steps,omitempty"`
	Cells       []jsonCell `json:"cells"`
}

// jsonCell is one table cell.
type jsonCell struct {
	Group     []string      `json:"group"`
	DiffSteps []int         `json:"diff_steps"`
	DiffUnits []json.Number `json:"diff_units"`
	P         []json.Number `json:"p"`
}

// JSON writes the decision tables of sol as one JSON object with one
// object per table cell, one cell to a line. Groups come in the order of
// tables.Subsets, cells in the order their table holds them, so ReadJSON
// rebuilds the very same tables. The fields are:
//
//	format      "pickwise-cells/2"
//	channels    the names of all channels of the model, in channel order
//	step        the step as the exact decimal of the model's step
//	unit        the reading unit (may be empty)
//	cells       one object per table cell:
//	  group       the names of the group's channels, in channel order
//	  diff_steps  r_k - r_first for each channel k of the group, in steps:
//	              its reading minus the reading of the group's first
//	              channel (so the first entry is 0)
//	  diff_units  the same differences in reading units, exact decimals
//	  p           the probability of picking each channel of the group,
//	              as the shortest decimal that reads back as the exact
//	              float64 (table probabilities are multiples of 2^-48);
//	              0 for a channel certainly below another
//
//	missing_cell_half_steps
//	            present only when the tables have offsets: per channel,
//	            in half steps, the offset of readings not covered by a cell
//
// Readings not covered by a cell pick, among the channels of the top group
// not certainly below another, the highest reading plus its offset (the
// highest 2*r_i/step + missing_cell_half_steps[i]; the highest reading
// without offsets), sharing a tie equally among the channels tied
// (tables.Fallback); with one such channel the choice is forced.
func JSON(w io.Writer, sol *result.Solution) error {
	if err := check(sol); err != nil {
		return err
	}
	m := sol.Model
	u := newUnits(m)
	nm := names(m)
	head := struct {
		Format      string   `json:"format"`
		Channels    []string `json:"channels"`
		Step        string   `json:"step"`
		Unit        string   `json:"unit"`
		MissingHalf []int    `json:"missing_cell_half_steps,omitempty"`
	}{CellsFormat, nm, u.of(1), m.Unit, sol.Tables.Half}
	var buf bytes.Buffer
	enc := json.NewEncoder(&buf)
	enc.SetEscapeHTML(false)
	if err := enc.Encode(head); err != nil {
		return fmt.Errorf("render: %w", err)
	}
	// Reopen the header object to append the cells, one per line.
	buf.Truncate(buf.Len() - 2) // "}\n"
	buf.WriteString(`,"cells":[`)
	first := true
	for _, t := range sol.Tables.Tables {
		for _, c := range t.Cells {
			jc := jsonCell{Group: groupNames(nm, t), DiffSteps: append([]int(nil), c.Diff...)}
			for k := range t.Members {
				jc.DiffUnits = append(jc.DiffUnits, json.Number(u.of(c.Diff[k])))
				jc.P = append(jc.P, json.Number(strconv.FormatFloat(c.P[k], 'g', -1, 64)))
			}
			if !first {
				buf.WriteByte(',')
			}
			first = false
			buf.WriteString("\n")
			if err := enc.Encode(jc); err != nil {
				return fmt.Errorf("render: %w", err)
			}
			buf.Truncate(buf.Len() - 1) // the encoder's newline
		}
	}
	buf.WriteString("\n]}\n")
	return flush(w, &buf)
}

// ReadJSON reads tables written by JSON for model m, whose layout is l
// (nil: computed from m), and rebuilds them. The channels must be m's, in
// order, and the step m's step exactly; every cell is checked as ReadCSV
// checks a record.
func ReadJSON(r io.Reader, m *discretize.Model, l *tables.Layout) (*tables.Optimal, error) {
	b, err := newBuilder(m, l)
	if err != nil {
		return nil, err
	}
	dec := json.NewDecoder(r)
	dec.UseNumber()
	dec.DisallowUnknownFields()
	var f cellsFile
	if err := dec.Decode(&f); err != nil {
		return nil, fmt.Errorf("render: json: %w", err)
	}
	if f.Format != CellsFormat {
		return nil, fmt.Errorf("render: json format %q, want %q", f.Format, CellsFormat)
	}
	if len(f.Channels) != len(b.names) {
		return nil, fmt.Errorf("render: json has %d channels, the model %d", len(f.Channels), len(b.names))
	}
	index := make(map[string]int, len(b.names))
	for i, name := range b.names {
		if f.Channels[i] != name {
			return nil, fmt.Errorf("render: json channel %d is %q, the model's is %q", i+1, f.Channels[i], name)
		}
		index[name] = i
	}
	step, ok := new(big.Rat).SetString(f.Step)
	if !ok || step.Cmp(result.StepRat(m.Step)) != 0 {
		return nil, fmt.Errorf("render: json step %q is not the model's step %v", f.Step, m.Step)
	}
	if err := b.setHalf(f.MissingHalf); err != nil {
		return nil, fmt.Errorf("render: json missing_cell_half_steps: %w", err)
	}
	for i, jc := range f.Cells {
		k := len(jc.Group)
		if len(jc.DiffSteps) != k || len(jc.DiffUnits) != k || len(jc.P) != k {
			return nil, fmt.Errorf("render: json cell %d: group, diff_steps, diff_units and p differ in length", i+1)
		}
		c := cellText{members: make([]int, k), steps: make([]string, k), units: make([]string, k), p: make([]string, k)}
		for j, name := range jc.Group {
			ch, ok := index[name]
			if !ok {
				return nil, fmt.Errorf("render: json cell %d: unknown channel %q", i+1, name)
			}
			c.members[j] = ch
			c.steps[j] = strconv.Itoa(jc.DiffSteps[j])
			c.units[j] = jc.DiffUnits[j].String()
			c.p[j] = jc.P[j].String()
		}
		if err := b.add(c); err != nil {
			return nil, fmt.Errorf("render: json cell %d: %w", i+1, err)
		}
	}
	return b.finish()
}

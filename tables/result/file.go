package result

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"math/big"
	"os"
	"path/filepath"
	"slices"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables"
)

// Format is the value of the format field of the result files this version
// writes and reads. Version 2: readings without a table cell share a tie of
// the offset rule equally (tables.Fallback); version 1 gave it to the
// lowest-numbered channel, so its certificates do not hold for version 2's
// reading of the same tables.
const Format = "pickwise-result/2"

// File is the JSON result file. Exact numbers are fractions written as
// strings ("3/8"); regrets are in reading units (steps times the step,
// which is read as the exact decimal it is written as); configurations are
// in steps, with null for channels far below the others.
type File struct {
	Format string `json:"format"`
	// ModelTOML is the model file as given, self-contained.
	ModelTOML string        `json:"model_toml,omitempty"`
	Step      string        `json:"step"` // decimal
	Unit      string        `json:"unit,omitempty"`
	Tail      float64       `json:"tail,omitempty"`
	Channels  []FileChannel `json:"channels"`
	// Layout records the lattice geometry; verify recomputes it from the
	// pmfs and compares.
	Layout FileLayout `json:"layout"`
	LP     FileLP     `json:"lp"`
	// TableDen: every table probability is an integer over table_den.
	TableDen uint64 `json:"table_den"`
	// ProbBits: prior weights are multiples of 2^-prob_bits.
	ProbBits uint        `json:"prob_bits"`
	Tables   []FileTable `json:"tables"`
	// MissingHalf holds, per channel, the offset in half steps of the
	// readings that no table cell covers: they pick the channel not
	// certainly below another with the highest 2*reading/step +
	// offset, the first in channel order on a tie. Absent: no offsets
	// (the highest reading).
	MissingHalf []int           `json:"missing_cell_half_steps,omitempty"`
	Prior       []FilePrior     `json:"prior"`
	Certificate FileCertificate `json:"certificate"`
	Greedy      FileFigure      `json:"greedy"`
	Offset      FileOffset      `json:"offset"`
}

// FileChannel is one channel's lattice noise pmf, exactly.
type FileChannel struct {
	Name  string   `json:"name"`
	Kind  string   `json:"kind"`
	Lo    int      `json:"lo"`    // lowest noise offset, in steps
	Probs []string `json:"probs"` // probability of offsets lo, lo+1, ... as fractions
	Cut   float64  `json:"cut"`   // mass moved from the tails into the end bins
}

// FileLayout is the lattice geometry, in steps.
type FileLayout struct {
	G int `json:"G"`
	S int `json:"S"`
	T int `json:"T"`
	D int `json:"D"`
}

// FileLP describes the LP that was solved.
type FileLP struct {
	Solver    string `json:"solver"`
	Method    string `json:"method"`           // direct or cg (constraint generation)
	Converged bool   `json:"converged"`        // false when constraint generation stopped early
	Rounds    int    `json:"rounds,omitempty"` // rounds of constraint generation
	// ShippedGreedy: constraint generation stopped early with a rule
	// worse than greedy, so the tables are greedy's.
	ShippedGreedy bool    `json:"shipped_greedy,omitempty"`
	Rows          int     `json:"rows"`
	Columns       int     `json:"columns"`
	Nonzeros      int     `json:"nonzeros"`
	Objective     float64 `json:"objective"` // in reading units
}

// FileTable is the decision table of one group of channels.
type FileTable struct {
	Group []string   `json:"group"` // channel names, in channel order
	Cells []FileCell `json:"cells"`
}

// FileCell is one table cell: the reading differences r_k - r_first in
// steps (one per group member, the first 0) and the probability of each
// member as a fraction.
type FileCell struct {
	Diff []int    `json:"diff"`
	P    []string `json:"p"`
}

// FilePrior is one configuration of the prior and its weight.
type FilePrior struct {
	Values []*int `json:"values"` // steps; null: far below
	Weight string `json:"weight"`
}

// FileCertificate holds the exact bounds on the optimum.
type FileCertificate struct {
	Lower        string  `json:"lower"`
	Upper        string  `json:"upper"`
	LowerDecimal float64 `json:"lower_decimal"`
	UpperDecimal float64 `json:"upper_decimal"`
	Gap          float64 `json:"gap"`
	Worst        []*int  `json:"worst"` // configuration where the shipped tables reach Upper
}

// FileFigure is the exact worst case of a rule.
type FileFigure struct {
	Regret  string  `json:"regret"`
	Decimal float64 `json:"decimal"`
	Worst   []*int  `json:"worst"`
}

// FileOffset is the offset rule and its figure.
type FileOffset struct {
	FileFigure
	Offsets   []float64 `json:"offsets"`    // reading units
	HalfSteps []int     `json:"half_steps"` // the same offsets in half steps
}

func fileValues(v []int) []*int {
	out := make([]*int, len(v))
	for i, x := range v {
		if x > tables.Far/2 {
			x := x
			out[i] = &x
		}
	}
	return out
}

func modelValues(v []*int) []int {
	out := make([]int, len(v))
	for i, x := range v {
		if x == nil {
			out[i] = tables.Far
		} else {
			out[i] = *x
		}
	}
	return out
}

func pow2(bits uint) *big.Int { return new(big.Int).Lsh(big.NewInt(1), bits) }

func ratString(num uint64, bits uint) string {
	return new(big.Rat).SetFrac(new(big.Int).SetUint64(num), pow2(bits)).RatString()
}

func figure(f Figure, step float64) FileFigure {
	u := Units(f.Regret, step)
	return FileFigure{Regret: u.RatString(), Decimal: Float(u), Worst: fileValues(f.Worst)}
}

// NewFile returns the result file of solution s; modelTOML is the model as
// given (may be empty).
func NewFile(s *Solution, modelTOML string) *File {
	m := s.Model
	l := s.Layout
	f := &File{
		Format:    Format,
		ModelTOML: modelTOML,
		Step:      StepRat(m.Step).FloatString(decimals(m.Step)),
		Unit:      m.Unit,
		Tail:      m.Tail,
		Layout:    FileLayout{G: l.G, S: l.S, T: l.T, D: l.D},
		LP: FileLP{Solver: s.Solver, Method: s.Method, Converged: s.Converged, Rounds: s.Rounds, ShippedGreedy: s.ShippedGreedy, Rows: s.Rows, Columns: s.Columns, Nonzeros: s.Nonzeros,
			Objective: s.Objective * m.Step},
		TableDen: s.TableDen,
		ProbBits: s.ProbBits,
	}
	for _, c := range m.Channels {
		fc := FileChannel{Name: c.Name, Kind: c.Kind, Lo: c.PMF.Lo, Cut: c.Cut}
		for _, x := range c.PMF.Num {
			fc.Probs = append(fc.Probs, ratString(x, discretize.DenomBits))
		}
		f.Channels = append(f.Channels, fc)
	}
	for _, t := range s.Tables.Tables {
		if len(t.Cells) == 0 {
			continue
		}
		ft := FileTable{}
		for _, ch := range t.Members {
			ft.Group = append(ft.Group, m.Channels[ch].Name)
		}
		for _, c := range t.Cells {
			fc := FileCell{Diff: append([]int(nil), c.Diff...)}
			for _, p := range c.P {
				q := int64(math.Round(p * float64(s.TableDen)))
				fc.P = append(fc.P, new(big.Rat).SetFrac64(q, int64(s.TableDen)).RatString())
			}
			ft.Cells = append(ft.Cells, fc)
		}
		f.Tables = append(f.Tables, ft)
	}
	f.MissingHalf = slices.Clone(s.Tables.Half)
	for k, v := range s.Configs {
		f.Prior = append(f.Prior, FilePrior{Values: fileValues(v), Weight: ratString(s.Weights[k], s.ProbBits)})
	}
	lo, up := Units(s.Lower, m.Step), Units(s.Upper, m.Step)
	f.Certificate = FileCertificate{
		Lower: lo.RatString(), Upper: up.RatString(),
		LowerDecimal: Float(lo), UpperDecimal: Float(up),
		Gap:   Float(new(big.Rat).Sub(up, lo)),
		Worst: fileValues(s.Optimal.Worst),
	}
	f.Greedy = figure(s.Greedy, m.Step)
	f.Offset = FileOffset{FileFigure: figure(s.Offset, m.Step), HalfSteps: append([]int(nil), s.OffsetHalf...)}
	for _, h := range s.OffsetHalf {
		f.Offset.Offsets = append(f.Offset.Offsets, float64(h)/2*m.Step)
	}
	return f
}

// decimals returns enough decimal places to write step exactly as its
// shortest decimal.
func decimals(step float64) int {
	r := StepRat(step)
	d := 0
	den := new(big.Int).Set(r.Denom())
	ten := big.NewInt(10)
	for den.Cmp(big.NewInt(1)) != 0 && d < 40 {
		den.Quo(den, new(big.Int).GCD(nil, nil, den, ten))
		d++
	}
	return d
}

// Encode writes f as indented JSON.
func (f *File) Encode(w io.Writer) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(f)
}

// WriteFile writes f to path atomically: to a temporary file in the same
// directory, then renamed over path.
func (f *File) WriteFile(path string) error {
	var buf bytes.Buffer
	if err := f.Encode(&buf); err != nil {
		return err
	}
	return WriteAtomic(path, buf.Bytes())
}

// WriteAtomic writes data to path through a temporary file in the same
// directory and a rename, so that path never holds a partial file.
func WriteAtomic(path string, data []byte) error {
	dir := filepath.Dir(path)
	tmp, err := os.CreateTemp(dir, "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return err
	}
	name := tmp.Name()
	if _, err := tmp.Write(data); err != nil {
		tmp.Close()
		os.Remove(name)
		return err
	}
	if err := tmp.Close(); err != nil {
		os.Remove(name)
		return err
	}
	if err := os.Chmod(name, 0o644); err != nil {
		os.Remove(name)
		return err
	}
	if err := os.Rename(name, path); err != nil {
		os.Remove(name)
		return err
	}
	return nil
}

// ReadFile reads a result file. Errors name the file.
func ReadFile(path string) (*File, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	return Decode(data, path)
}

// Decode parses a result file; name is used in messages.
func Decode(data []byte, name string) (*File, error) {
	var f File
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&f); err != nil {
		return nil, fmt.Errorf("%s: not a pickwise result file: %w", name, err)
	}
	if f.Format != Format {
		return nil, fmt.Errorf("%s: format %q, want %q", name, f.Format, Format)
	}
	return &f, nil
}

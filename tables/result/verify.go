package result

import (
	"fmt"
	"math/big"
	"strconv"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/exact"
)

// Mismatch is returned by Verify when a figure or an entry of a result file
// does not hold: What names the first item that failed (a bound, a table
// cell, a channel's pmf, the prior).
type Mismatch struct {
	What   string
	Detail string
}

func (e *Mismatch) Error() string { return e.What + ": " + e.Detail }

func mismatch(what, format string, a ...any) error {
	return &Mismatch{What: what, Detail: fmt.Sprintf(format, a...)}
}

// Report summarises a successful verification.
type Report struct {
	Channels, Tables, Cells, Prior int
	Lower, Upper                   *big.Rat // reading units
	Greedy, Offset                 *big.Rat // reading units
	Configurations                 int
}

// parseOver parses a fraction and checks that it is a multiple of 1/den in
// [0, 1]; it returns the numerator over den.
func parseOver(s string, den uint64) (uint64, error) {
	r, ok := new(big.Rat).SetString(s)
	if !ok {
		return 0, fmt.Errorf("%q is not a fraction", s)
	}
	if r.Sign() < 0 || r.Cmp(big.NewRat(1, 1)) > 0 {
		return 0, fmt.Errorf("%s is outside [0, 1]", s)
	}
	x := new(big.Rat).Mul(r, new(big.Rat).SetInt(new(big.Int).SetUint64(den)))
	if !x.IsInt() {
		return 0, fmt.Errorf("%s is not a multiple of 1/%d", s, den)
	}
	return x.Num().Uint64(), nil
}

// parseDyadic parses a fraction and checks that it is a multiple of
// 2^-bits in [0, 1]; it returns the numerator over 2^bits.
func parseDyadic(s string, bits uint) (uint64, error) {
	r, ok := new(big.Rat).SetString(s)
	if !ok {
		return 0, fmt.Errorf("%q is not a fraction", s)
	}
	if r.Sign() < 0 || r.Cmp(big.NewRat(1, 1)) > 0 {
		return 0, fmt.Errorf("%s is outside [0, 1]", s)
	}
	x := new(big.Rat).Mul(r, new(big.Rat).SetInt(pow2(bits)))
	if !x.IsInt() {
		return 0, fmt.Errorf("%s is not a multiple of 2^-%d", s, bits)
	}
	return x.Num().Uint64(), nil
}

// Model rebuilds the discretized model of a result file from its exact
// pmfs, without re-discretizing anything.
func (f *File) Model() (*discretize.Model, error) {
	step, err := strconv.ParseFloat(f.Step, 64)
	if err != nil || !(step > 0) {
		return nil, mismatch("step", "%q is not a positive number", f.Step)
	}
	if len(f.Channels) < 2 {
		return nil, mismatch("channels", "%d channels, need at least 2", len(f.Channels))
	}
	m := &discretize.Model{Step: step, Unit: f.Unit, Tail: f.Tail}
	seen := make(map[string]bool)
	for i, c := range f.Channels {
		what := fmt.Sprintf("channel %q", c.Name)
		if seen[c.Name] || c.Name == "" {
			return nil, mismatch(what, "channel %d: name empty or repeated", i+1)
		}
		seen[c.Name] = true
		p := discretize.PMF{Lo: c.Lo}
		for k, s := range c.Probs {
			x, err := parseDyadic(s, discretize.DenomBits)
			if err != nil {
				return nil, mismatch(what, "pmf entry %d (offset %d steps): %v", k, c.Lo+k, err)
			}
			p.Num = append(p.Num, x)
		}
		if err := p.Check(); err != nil {
			return nil, mismatch(what, "pmf: %v", err)
		}
		m.Channels = append(m.Channels, discretize.Channel{Name: c.Name, Kind: c.Kind, PMF: p, Cut: c.Cut})
	}
	return m, nil
}

// Solution rebuilds the solution recorded in a result file, checking its
// structure (exact pmfs, valid cells summing to 1, a prior summing to 1) but
// recomputing no figure: the figures are taken as stated. Use Verify to
// recompute them.
func (f *File) Solution() (*Solution, error) {
	m, err := f.Model()
	if err != nil {
		return nil, err
	}
	l, err := tables.NewLayout(m)
	if err != nil {
		return nil, mismatch("channels", "%v", err)
	}
	if reach := f.Layout.T - l.T; reach > 0 {
		l.Widen(reach)
	}
	if got := (FileLayout{G: l.G, S: l.S, T: l.T, D: l.D}); got != f.Layout {
		return nil, mismatch("layout", "stated %+v, the pmfs give %+v (T may exceed G+S, with D = T+S)", f.Layout, got)
	}
	bits := f.ProbBits
	if bits == 0 || bits > 62 {
		return nil, mismatch("prob_bits", "%d is not in [1, 62]", bits)
	}
	if f.TableDen == 0 || f.TableDen > 1<<52 {
		return nil, mismatch("table_den", "%d is not in [1, 2^52]", f.TableDen)
	}
	s := &Solution{Model: m, Layout: l, TableDen: f.TableDen, Solver: f.LP.Solver, Method: f.LP.Method, Converged: f.LP.Converged, Rounds: f.LP.Rounds, ShippedGreedy: f.LP.ShippedGreedy, Rows: f.LP.Rows, Columns: f.LP.Columns,
		Nonzeros: f.LP.Nonzeros, Objective: f.LP.Objective / m.Step, ProbBits: bits}

	// Tables.
	byName := make(map[string]int)
	for i, c := range m.Channels {
		byName[c.Name] = i
	}
	o := tables.NewOptimal(l)
	names := make([]string, len(m.Channels))
	for i, c := range m.Channels {
		names[i] = c.Name
	}
	if err := o.SetHalf(f.MissingHalf, names); err != nil {
		return nil, mismatch("missing_cell_half_steps", "%v", err)
	}
	for ti, ft := range f.Tables {
		var g tables.Set
		for _, name := range ft.Group {
			i, ok := byName[name]
			if !ok {
				return nil, mismatch(fmt.Sprintf("table %d", ti+1), "unknown channel %q", name)
			}
			g |= tables.SetOf(i)
		}
		t := o.Table(g)
		if t == nil || g.Len() != len(ft.Group) {
			return nil, mismatch(fmt.Sprintf("table %d", ti+1), "group %v is not a set of at least two channels", ft.Group)
		}
		for ci, fc := range ft.Cells {
			what := fmt.Sprintf("table %v cell %d (differences %v)", ft.Group, ci+1, fc.Diff)
			if len(fc.Diff) != len(t.Members) || len(fc.P) != len(t.Members) {
				return nil, mismatch(what, "want %d differences and %d probabilities", len(t.Members), len(t.Members))
			}
			r := make([]int, l.N())
			for i := range r {
				r[i] = tables.Far
			}
			for k, ch := range t.Members {
				r[ch] = fc.Diff[k]
			}
			if fc.Diff[0] != 0 || l.TopGroup(r) != g {
				return nil, mismatch(what, "these differences do not form group %v", ft.Group)
			}
			alive := l.Alive(g, r)
			if alive.Len() < 2 {
				return nil, mismatch(what, "only one channel is not certainly below another: not a table cell")
			}
			if t.Lookup(r) >= 0 {
				return nil, mismatch(what, "cell repeated")
			}
			p := make([]float64, len(t.Members))
			var sum uint64
			for k, str := range fc.P {
				x, err := parseOver(str, f.TableDen)
				if err != nil {
					return nil, mismatch(what, "probability of channel %q: %v", m.Channels[t.Members[k]].Name, err)
				}
				if x != 0 && !alive.Has(t.Members[k]) {
					return nil, mismatch(what, "channel %q is certainly below another but has probability %s", m.Channels[t.Members[k]].Name, str)
				}
				sum += x
				p[k] = float64(x) / float64(f.TableDen)
			}
			if sum != f.TableDen {
				return nil, mismatch(what, "probabilities sum to %s, not 1", new(big.Rat).SetFrac(new(big.Int).SetUint64(sum), new(big.Int).SetUint64(f.TableDen)).RatString())
			}
			t.Add(r, alive, p)
		}
	}
	s.Tables = o

	// Prior.
	for k, fp := range f.Prior {
		what := fmt.Sprintf("prior weight %d (values %s)", k+1, valuesString(fp.Values))
		if len(fp.Values) != l.N() {
			return nil, mismatch(what, "%d values, want %d", len(fp.Values), l.N())
		}
		x, err := parseDyadic(fp.Weight, bits)
		if err != nil {
			return nil, mismatch(what, "%v", err)
		}
		s.Configs = append(s.Configs, modelValues(fp.Values))
		s.Weights = append(s.Weights, x)
	}

	// Stated figures, back in steps.
	inSteps := func(what, str string) (*big.Rat, error) {
		r, ok := new(big.Rat).SetString(str)
		if !ok {
			return nil, mismatch(what, "%q is not a fraction", str)
		}
		return r.Quo(r, StepRat(m.Step)), nil
	}
	if s.Lower, err = inSteps("lower bound", f.Certificate.Lower); err != nil {
		return nil, err
	}
	if s.Upper, err = inSteps("upper bound", f.Certificate.Upper); err != nil {
		return nil, err
	}
	s.Optimal = Figure{Regret: s.Upper, Worst: modelValues(f.Certificate.Worst)}
	gr, err := inSteps("greedy worst-case regret", f.Greedy.Regret)
	if err != nil {
		return nil, err
	}
	s.Greedy = Figure{Regret: gr, Worst: modelValues(f.Greedy.Worst)}
	or, err := inSteps("offset-rule worst-case regret", f.Offset.Regret)
	if err != nil {
		return nil, err
	}
	s.Offset = Figure{Regret: or, Worst: modelValues(f.Offset.Worst)}
	s.OffsetHalf = append([]int(nil), f.Offset.HalfSteps...)
	return s, nil
}

// Verify recomputes every certified figure of f in exact arithmetic, from
// the file alone: the upper bound (the worst case of the tables as
// written), the lower bound (the Bayes risk of the prior as written), and
// the greedy and offset figures. It needs no LP solver. It returns a
// *Mismatch naming the first figure or entry that does not hold.
func Verify(f *File) (*Report, error) {
	s, err := f.Solution()
	if err != nil {
		return nil, err
	}
	m, l := s.Model, s.Layout
	stepRat := StepRat(m.Step)
	rep := &Report{Channels: len(m.Channels), Prior: len(s.Configs)}
	for _, t := range s.Tables.Tables {
		if len(t.Cells) > 0 {
			rep.Tables++
			rep.Cells += len(t.Cells)
		}
	}
	et, err := exact.NewTableDen(s.Tables, s.TableDen)
	if err != nil {
		return nil, mismatch("tables", "%v", err)
	}

	// Upper bound: the exact worst case of the tables as written.
	up, err := exact.WorstCaseScreened(l, et, l.D)
	if err != nil {
		return nil, err
	}
	upU := new(big.Rat).Mul(up.Regret, stepRat)
	if err := sameRat("upper bound", f.Certificate.Upper, upU, up.Values); err != nil {
		return nil, err
	}
	rep.Upper = upU

	// Lower bound: the exact Bayes risk of the prior as written.
	lo, err := lowerBound(l, s.Configs, s.Weights, s.ProbBits)
	if err != nil {
		return nil, mismatch("prior", "%v", err)
	}
	loU := new(big.Rat).Mul(lo, stepRat)
	if err := sameRat("lower bound", f.Certificate.Lower, loU, nil); err != nil {
		return nil, err
	}
	rep.Lower = loU
	if loU.Cmp(upU) > 0 {
		return nil, mismatch("certificate", "lower bound %s exceeds upper bound %s", loU.RatString(), upU.RatString())
	}

	// Heuristics.
	half := l.OffsetHalfSteps()
	gr, of, err := heuristics(l, half)
	if err != nil {
		return nil, err
	}
	gU := new(big.Rat).Mul(gr.Regret, stepRat)
	if err := sameRat("greedy worst-case regret", f.Greedy.Regret, gU, gr.Worst); err != nil {
		return nil, err
	}
	rep.Greedy = gU
	if fmt.Sprint(half) != fmt.Sprint(f.Offset.HalfSteps) {
		return nil, mismatch("offsets", "stated %v half steps, the pmfs give %v", f.Offset.HalfSteps, half)
	}
	oU := new(big.Rat).Mul(of.Regret, stepRat)
	if err := sameRat("offset-rule worst-case regret", f.Offset.Regret, oU, of.Worst); err != nil {
		return nil, err
	}
	rep.Offset = oU
	return rep, nil
}

func sameRat(what, stated string, got *big.Rat, worst []int) error {
	s, ok := new(big.Rat).SetString(stated)
	if !ok {
		return mismatch(what, "%q is not a fraction", stated)
	}
	if s.Cmp(got) != 0 {
		at := ""
		if worst != nil {
			at = fmt.Sprintf(" (reached at values %s)", valuesString(fileValues(worst)))
		}
		return mismatch(what, "stated %s (%.12g), recomputed %s (%.12g)%s", s.RatString(), Float(s), got.RatString(), Float(got), at)
	}
	return nil
}

func valuesString(v []*int) string {
	s := "["
	for i, x := range v {
		if i > 0 {
			s += " "
		}
		if x == nil {
			s += "far"
		} else {
			s += strconv.Itoa(*x)
		}
	}
	return s + "]"
}

package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math/big"
	"os"
	"strconv"
	"strings"

	"github.com/olekukonko/tablewriter"
	"github.com/olekukonko/tablewriter/tw"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/discretize/spec"
	"github.com/pickwise/pickwise/lp"
	"github.com/pickwise/pickwise/lp/clp"
	"github.com/pickwise/pickwise/lp/gonumlp"
	"github.com/pickwise/pickwise/lp/minimax"
	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/result"
)

const caution = "The guarantee holds for the stated noise model only. Check the model against your own calibration, and defer to the codes and practices of your field."

func solverByName(name string) (lp.Solver, error) {
	switch name {
	case "clp":
		return clp.Solver{}, nil
	case "gonum":
		return gonumlp.Solver{}, nil
	}
	return nil, fmt.Errorf("unknown solver %q (want clp or gonum)", name)
}

// loadModel reads and discretizes a model file, and returns it with the
// model as given, encoded self-contained.
func loadModel(path string) (*discretize.Model, string, error) {
	f, err := spec.Load(path)
	if err != nil {
		return nil, "", err
	}
	m, err := f.Discretize()
	if err != nil {
		return nil, "", err
	}
	var buf bytes.Buffer
	if err := f.Encode(&buf); err != nil {
		return nil, "", fmt.Errorf("%s: %w", path, err)
	}
	return m, buf.String(), nil
}

// solveStatus maps a solve error to an exit status: bad input is 2, other
// failures 1.
func solveStatus(err error) int {
	var se *spec.Error
	var size *minimax.SizeError
	if errors.As(err, &se) || errors.As(err, &size) {
		return exitUsage
	}
	return exitMismatch
}

func runSolve(a *app, args []string) int {
	fs := a.flagSet("solve", "MODEL.toml [flags]", `
Solve the model exactly: the optimal rule (one decision table per group of
channels whose readings sit together), a certificate (exact lower and upper
bounds on the optimum), and the exact worst-case regret of the greedy rule
and of the offset rule. Prints a summary; --json prints one JSON object
instead; -o also writes the full result file for "pickwise verify" and
"pickwise table".`)
	asJSON := fs.Bool("json", false, "print one JSON object instead of the summary")
	out := fs.String("o", "", "write the result file (JSON) to this path")
	solverName := fs.String("solver", "clp", "LP backend: clp or gonum (pure Go, small models only)")
	reach := fs.Int("reach", 0, "widen the grouping distance T by this many steps: a larger LP, an optimum no higher")
	method := fs.String("method", "auto", "how to solve the LP: direct (every configuration), cg (constraint generation), or auto")
	timeLimit := fs.Duration("time-limit", 0, "stop constraint generation after this long (e.g. 90s) and certify the best rule found")
	quiet := fs.Bool("quiet", false, "no progress on standard error")
	pos, st, done := a.parse(fs, args)
	if done {
		return st
	}
	if len(pos) != 1 {
		fs.Usage()
		return exitUsage
	}
	solver, err := solverByName(*solverName)
	if err != nil {
		return a.fail(exitUsage, "%v", err)
	}
	m, given, err := loadModel(pos[0])
	if err != nil {
		return a.fail(exitUsage, "%v", err)
	}
	if *reach < 0 {
		return a.fail(exitUsage, "--reach %d: must be >= 0", *reach)
	}
	opt := result.Options{Solver: solver, Reach: *reach, Method: *method, TimeLimit: *timeLimit}
	if !*quiet && a.stderrIsTerminal() {
		opt.Progress = a.progress
	}
	sol, err := result.Solve(context.Background(), m, opt)
	if opt.Progress != nil && sol != nil && sol.Method == result.MethodCG {
		fmt.Fprintln(a.stderr)
	}
	if err != nil {
		return a.fail(solveStatus(err), "%s: %v", pos[0], err)
	}
	if *out != "" {
		if err := result.NewFile(sol, given).WriteFile(*out); err != nil {
			return a.fail(exitMismatch, "writing %s: %v", *out, err)
		}
	}
	if *asJSON {
		if err := writeSummaryJSON(a.stdout, sol); err != nil {
			return a.fail(exitMismatch, "%v", err)
		}
		return exitOK
	}
	writeSummary(a.stdout, sol, true)
	if *out != "" {
		fmt.Fprintf(a.stdout, "\nResult file written to %s.\n", *out)
	}
	return exitOK
}

// newTable returns a tablewriter table that keeps header text as given.
func newTable(w io.Writer) *tablewriter.Table {
	return tablewriter.NewTable(w,
		tablewriter.WithHeaderAutoFormat(tw.Off),
		tablewriter.WithRowAutoWrap(tw.WrapNone),
		tablewriter.WithHeaderAlignment(tw.AlignLeft),
	)
}

// num formats a reading-unit figure.
func num(x float64) string { return strconv.FormatFloat(x, 'g', 6, 64) }

func unitSuffix(m *discretize.Model) string {
	if m.Unit == "" {
		return ""
	}
	return " " + m.Unit
}

// valuesText describes a configuration in reading units.
func valuesText(m *discretize.Model, v []int) string {
	if v == nil {
		return "-"
	}
	var parts []string
	var far []string
	for i, x := range v {
		if x <= tables.Far/2 {
			far = append(far, m.Channels[i].Name)
			continue
		}
		parts = append(parts, fmt.Sprintf("%s=%s", m.Channels[i].Name, num(float64(x)*m.Step)))
	}
	s := strings.Join(parts, ", ")
	if len(far) > 0 {
		s += "; " + strings.Join(far, ", ") + " far below"
	}
	return s
}

func ratio(x, opt *big.Rat) string {
	if opt.Sign() == 0 {
		if x.Sign() == 0 {
			return "1"
		}
		return "inf"
	}
	return strconv.FormatFloat(result.Float(new(big.Rat).Quo(x, opt)), 'f', 4, 64)
}

// writeSummary prints the human summary of a solution; timing adds the
// LP build and solve times (omitted where output must be reproducible).
func writeSummary(w io.Writer, sol *result.Solution, timing bool) {
	m, l := sol.Model, sol.Layout
	u := unitSuffix(m)
	fmt.Fprintf(w, "Model: %d channels, step %s%s\n\n", m.N(), num(m.Step), u)
	t := newTable(w)
	t.Header([]string{"channel", "noise", "support" + u, "points", "mean" + u, "sd" + u, "tail mass cut"})
	for i, c := range m.Channels {
		t.Append([]string{c.Name, c.Kind,
			fmt.Sprintf("[%s, %s]", num(float64(l.Lo[i])*m.Step), num(float64(l.Hi[i])*m.Step)),
			strconv.Itoa(len(c.PMF.Num)), num(c.PMF.Mean() * m.Step), num(c.PMF.Std() * m.Step),
			strconv.FormatFloat(c.Cut, 'g', 3, 64)})
	}
	t.Render()

	opt := sol.Upper
	unitNote := ""
	if m.Unit != "" {
		unitNote = ", in " + m.Unit
	}
	fmt.Fprintf(w, "\nWorst-case regret%s (expected shortfall of the chosen channel from the truly best one):\n\n", unitNote)
	t = newTable(w)
	t.Header([]string{"rule", "worst-case regret" + u, "ratio to optimum", "worst configuration (true values" + u + ")"})
	t.Append([]string{"optimal (tables)", num(result.Float(result.Units(sol.Upper, m.Step))), "1", valuesText(m, sol.Optimal.Worst)})
	t.Append([]string{"greedy", num(result.Float(result.Units(sol.Greedy.Regret, m.Step))), ratio(sol.Greedy.Regret, opt), valuesText(m, sol.Greedy.Worst)})
	t.Append([]string{"offset rule", num(result.Float(result.Units(sol.Offset.Regret, m.Step))), ratio(sol.Offset.Regret, opt), valuesText(m, sol.Offset.Worst)})
	t.Render()

	var offs []string
	for i, h := range sol.OffsetHalf {
		offs = append(offs, fmt.Sprintf("%s %+g", m.Channels[i].Name, float64(h)/2*m.Step))
	}
	fmt.Fprintf(w, "\nOffsets of the offset rule%s: %s\n", u, strings.Join(offs, ", "))

	lo, up := result.Units(sol.Lower, m.Step), result.Units(sol.Upper, m.Step)
	fmt.Fprintf(w, "\nCertificate: the optimum lies in [%.15g, %.15g]%s (gap %.3g), checked in exact arithmetic.\n",
		result.Float(lo), result.Float(up), u, result.Float(new(big.Rat).Sub(up, lo)))
	fmt.Fprintf(w, "  lower bound: Bayes risk of a prior over %d configurations, valid for every rule\n", len(sol.Configs))
	fmt.Fprintf(w, "  upper bound: worst case of the shipped tables (%d cells)\n", sol.Tables.NumCells())
	if gap := result.Float(new(big.Rat).Sub(up, lo)); gap > 1e-9*result.Float(up) && sol.Converged {
		fmt.Fprintf(w, "  The bounds differ by more than round-off: the shipped tables are within %.3g%s of the best\n"+
			"  possible rule. Tables that read channels further below the top group can do slightly better;\n"+
			"  --reach K widens the grouping distance by K steps (now T = %d) and narrows the interval.\n", gap, u, l.T)
	}
	if !sol.Converged {
		fmt.Fprintf(w, "  Constraint generation stopped at the time limit after %d rounds: the interval is certified but wider.\n", sol.Rounds)
	}
	if sol.ShippedGreedy {
		fmt.Fprintf(w, "  The rule it had reached was worse than greedy, so the shipped tables are greedy's\n"+
			"  (ties at the top reading shared among the channels not certainly below another).\n")
	}

	fmt.Fprintf(w, "\nLP (%s, %s): %d rows, %d columns, %d nonzeros", sol.Solver, methodText(sol), sol.Rows, sol.Columns, sol.Nonzeros)
	if timing {
		tm := sol.Timing
		fmt.Fprintf(w, "; build %s, solve %s, polish %s, certify %s; greedy and offset figures %s",
			tm.Build.Round(1e6), tm.Solve.Round(1e6), tm.Polish.Round(1e6), tm.Certify.Round(1e6), tm.Heuristics.Round(1e6))
	}
	fmt.Fprintf(w, "\n\n%s\n", caution)
}

// summaryJSON is the object printed by solve --json. Figures are in
// reading units.
type summaryJSON struct {
	Unit          string          `json:"unit,omitempty"`
	Step          float64         `json:"step"`
	Channels      []string        `json:"channels"`
	OptimalRegret float64         `json:"optimal_regret"`
	GreedyRegret  float64         `json:"greedy_regret"`
	OffsetRegret  float64         `json:"offset_regret"`
	GreedyRatio   float64         `json:"greedy_ratio"`
	OffsetRatio   float64         `json:"offset_ratio"`
	Offsets       []float64       `json:"offsets"`
	LowerBound    float64         `json:"lower_bound"`
	UpperBound    float64         `json:"upper_bound"`
	Certificate   certificateJSON `json:"certificate"`
	OptimalWorst  []*float64      `json:"optimal_worst"`
	GreedyWorst   []*float64      `json:"greedy_worst"`
	OffsetWorst   []*float64      `json:"offset_worst"`
	LP            lpJSON          `json:"lp"`
}

type certificateJSON struct {
	Lower string `json:"lower"`
	Upper string `json:"upper"`
}

type lpJSON struct {
	Solver    string `json:"solver"`
	Method    string `json:"method"`
	Converged bool   `json:"converged"`
	Rounds    int    `json:"rounds,omitempty"`
	// ShippedGreedy: stopped early with a rule worse than greedy, so the
	// tables are greedy's.
	ShippedGreedy bool    `json:"shipped_greedy,omitempty"`
	Rows          int     `json:"rows"`
	Columns       int     `json:"columns"`
	Nonzeros      int     `json:"nonzeros"`
	Objective     float64 `json:"objective"`
}

func worstJSON(m *discretize.Model, v []int) []*float64 {
	out := make([]*float64, len(v))
	for i, x := range v {
		if x > tables.Far/2 {
			f := float64(x) * m.Step
			out[i] = &f
		}
	}
	return out
}

func writeSummaryJSON(w io.Writer, sol *result.Solution) error {
	m := sol.Model
	uf := func(r *big.Rat) float64 { return result.Float(result.Units(r, m.Step)) }
	ratioF := func(x *big.Rat) float64 {
		if sol.Upper.Sign() == 0 {
			return 1
		}
		return result.Float(new(big.Rat).Quo(x, sol.Upper))
	}
	s := summaryJSON{
		Unit: m.Unit, Step: m.Step,
		OptimalRegret: uf(sol.Upper), GreedyRegret: uf(sol.Greedy.Regret), OffsetRegret: uf(sol.Offset.Regret),
		GreedyRatio: ratioF(sol.Greedy.Regret), OffsetRatio: ratioF(sol.Offset.Regret),
		LowerBound: uf(sol.Lower), UpperBound: uf(sol.Upper),
		Certificate: certificateJSON{
			Lower: result.Units(sol.Lower, m.Step).RatString(),
			Upper: result.Units(sol.Upper, m.Step).RatString(),
		},
		OptimalWorst: worstJSON(m, sol.Optimal.Worst),
		GreedyWorst:  worstJSON(m, sol.Greedy.Worst),
		OffsetWorst:  worstJSON(m, sol.Offset.Worst),
		LP: lpJSON{Solver: sol.Solver, Method: sol.Method, Converged: sol.Converged, Rounds: sol.Rounds, ShippedGreedy: sol.ShippedGreedy, Rows: sol.Rows, Columns: sol.Columns, Nonzeros: sol.Nonzeros,
			Objective: sol.Objective * m.Step},
	}
	for _, c := range m.Channels {
		s.Channels = append(s.Channels, c.Name)
	}
	for _, h := range sol.OffsetHalf {
		s.Offsets = append(s.Offsets, float64(h)/2*m.Step)
	}
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(s)
}

func methodText(sol *result.Solution) string {
	if sol.Method == result.MethodCG {
		return fmt.Sprintf("constraint generation, %d rounds", sol.Rounds)
	}
	return "direct"
}

// stderrIsTerminal reports whether standard error is a terminal.
func (a *app) stderrIsTerminal() bool {
	f, ok := a.stderr.(*os.File)
	if !ok {
		return false
	}
	fi, err := f.Stat()
	return err == nil && fi.Mode()&os.ModeCharDevice != 0
}

// progress prints one round of constraint generation on standard error.
func (a *app) progress(p minimax.Progress) {
	fmt.Fprintf(a.stderr, "\rround %d: %d configurations, LP %.9g, worst case of the round's rule %.9g, of the best rule %.9g (steps), %d above the LP, %s   ",
		p.Round, p.Configs, p.LPValue, p.WorstCase, p.Best, p.Violations, p.Elapsed.Round(1e7))
}

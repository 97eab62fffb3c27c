package main

import (
	"bytes"
	"fmt"
	"path/filepath"
	"strings"

	"github.com/pickwise/pickwise/lp"
	"github.com/pickwise/pickwise/lp/minimax"
	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/result"
)

func runLP(a *app, args []string) int {
	fs := a.flagSet("lp", "MODEL.toml -o model.mps", `
Write the exact LP of the model (the direct formulation: one regret row per
configuration, one row per table cell) in free MPS, an open format that any
LP solver reads. Its optimum, times the step, is the minimax regret in
reading units. Column C0 is the worst-case regret t in steps.`)
	out := fs.String("o", "", "path of the MPS file to write (required)")
	pos, st, done := a.parse(fs, args)
	if done {
		return st
	}
	if len(pos) != 1 || *out == "" {
		fs.Usage()
		return exitUsage
	}
	m, _, err := loadModel(pos[0])
	if err != nil {
		return a.fail(exitUsage, "%v", err)
	}
	l, err := tables.NewLayout(m)
	if err != nil {
		return a.fail(exitUsage, "%s: %v", pos[0], err)
	}
	f, err := minimax.Build(l, minimax.Options{})
	if err != nil {
		return a.fail(solveStatus(err), "%s: %v", pos[0], err)
	}
	var buf bytes.Buffer
	name := strings.TrimSuffix(filepath.Base(pos[0]), filepath.Ext(pos[0]))
	if err := lp.WriteMPS(&buf, f.Problem, name); err != nil {
		return a.fail(exitMismatch, "%v", err)
	}
	if err := result.WriteAtomic(*out, buf.Bytes()); err != nil {
		return a.fail(exitMismatch, "writing %s: %v", *out, err)
	}
	fmt.Fprintf(a.stdout, "Wrote %s: %d rows, %d columns, %d nonzeros (objective in steps of %g%s).\n",
		*out, f.Problem.NumRows(), f.Problem.NumCols(), f.Problem.NumNonzeros(), m.Step, unitSuffix(m))
	return exitOK
}

package main

import (
	"fmt"

	"github.com/pickwise/pickwise/tables/plot"
)

func runPlot(a *app, args []string) int {
	fs := a.flagSet("plot", "SOURCE -o FILE.png|FILE.svg", `
Draw the optimal rule. SOURCE is a result file (.json) or a model file
(solved first). For two channels: the probability of choosing each channel
against the reading difference, and the regret of the optimal, greedy and
offset rules against the true value difference. For three or more: the
decision regions of the first three channels over the plane of reading
differences, randomized cells marked.`)
	out := fs.String("o", "", "picture to write: .png or .svg (required)")
	width := fs.Int("width", plot.DefaultWidth, "width in pixels")
	height := fs.Int("height", plot.DefaultHeight, "height in pixels")
	solverName := fs.String("solver", "clp", "LP backend when SOURCE is a model: clp or gonum")
	reach := fs.Int("reach", 0, "when SOURCE is a model: widen the grouping distance T by this many steps")
	pos, st, done := a.parse(fs, args)
	if done {
		return st
	}
	if len(pos) != 1 || *out == "" {
		fs.Usage()
		return exitUsage
	}
	if _, err := plot.FormatFor(*out); err != nil {
		return a.fail(exitUsage, "-o: %v", err)
	}
	sol, _, status, err := loadSource(pos[0], *solverName, *reach)
	if err != nil {
		return a.fail(status, "%v", err)
	}
	if err := plot.Write(sol, *out, *width, *height); err != nil {
		return a.fail(exitUsage, "%v", err)
	}
	fmt.Fprintf(a.stdout, "Wrote %s.\n", *out)
	return exitOK
}

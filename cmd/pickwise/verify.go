package main

import (
	"errors"
	"fmt"
	"math/big"

	"github.com/pickwise/pickwise/tables/result"
)

func runVerify(a *app, args []string) int {
	fs := a.flagSet("verify", "RESULT.json", `
Re-check a result file written by "pickwise solve -o", from the file alone
and in exact rational arithmetic, without any LP solver and without
re-discretizing: the upper bound (the worst-case regret of the tables as
written), the lower bound (the Bayes risk of the prior as written), and the
greedy and offset figures.

Exit status: 0 when everything matches; 1 with the first mismatch named;
2 when the file cannot be read.`)
	pos, st, done := a.parse(fs, args)
	if done {
		return st
	}
	if len(pos) != 1 {
		fs.Usage()
		return exitUsage
	}
	f, err := result.ReadFile(pos[0])
	if err != nil {
		return a.fail(exitUsage, "%v", err)
	}
	rep, err := result.Verify(f)
	var mm *result.Mismatch
	if errors.As(err, &mm) {
		fmt.Fprintf(a.stdout, "%s: MISMATCH: %v\n", pos[0], err)
		return exitMismatch
	}
	if err != nil {
		return a.fail(exitUsage, "%s: %v", pos[0], err)
	}
	u := ""
	if f.Unit != "" {
		u = " " + f.Unit
	}
	gap := new(big.Rat).Sub(rep.Upper, rep.Lower)
	fmt.Fprintf(a.stdout, "%s: verified in exact arithmetic (%d channels, %d tables, %d cells, prior over %d configurations)\n",
		pos[0], rep.Channels, rep.Tables, rep.Cells, rep.Prior)
	fmt.Fprintf(a.stdout, "  optimum in [%.15g, %.15g]%s, gap %.3g\n", result.Float(rep.Lower), result.Float(rep.Upper), u, result.Float(gap))
	fmt.Fprintf(a.stdout, "  greedy worst case %.15g%s, offset rule worst case %.15g%s\n", result.Float(rep.Greedy), u, result.Float(rep.Offset), u)
	return exitOK
}

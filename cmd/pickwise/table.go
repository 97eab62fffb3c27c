package main

import (
	"bytes"
	"fmt"
	"path/filepath"

	"github.com/pickwise/pickwise/tables/cgen"
	"github.com/pickwise/pickwise/tables/render"
	"github.com/pickwise/pickwise/tables/result"
)

// tableFormats lists the formats of "pickwise table", in help order.
var tableFormats = []string{"text", "csv", "json", "md", "html", "c"}

func runTable(a *app, args []string) int {
	fs := a.flagSet("table", "SOURCE --format FORMAT [-o PATH]", `
Write the optimal rule's decision tables. SOURCE is a result file (.json,
from "pickwise solve -o") or a model file (solved first).

Formats:
  text  terminal tables, one per group of channels
  csv   one record per table cell: group, reading differences, probabilities
  json  the same as JSON objects
  md    a printable procedure in Markdown, probabilities rounded to
        hundredths with the exact worst-case regret of what is printed
  html  the same procedure as one self-contained HTML page (A4 and Letter)
  c     a C99 header and source: 16-bit fixed-point tables and a chooser
        function; -o names the directory (default: current), --prefix the
        C names and the file names`)
	format := fs.String("format", "text", "output format: text, csv, json, md, html or c")
	out := fs.String("o", "", "output file (directory for c); default standard output")
	prefix := fs.String("prefix", "pickwise", "C name prefix and file base name (format c)")
	title := fs.String("title", "", "title of the md and html procedure")
	ascii := fs.Bool("ascii", false, "draw text tables with ASCII characters only")
	solverName := fs.String("solver", "clp", "LP backend when SOURCE is a model: clp or gonum")
	reach := fs.Int("reach", 0, "when SOURCE is a model: widen the grouping distance T by this many steps")
	pos, st, done := a.parse(fs, args)
	if done {
		return st
	}
	if len(pos) != 1 {
		fs.Usage()
		return exitUsage
	}
	known := false
	for _, f := range tableFormats {
		known = known || f == *format
	}
	if !known {
		return a.fail(exitUsage, "unknown format %q (want one of %v)", *format, tableFormats)
	}
	if *format == "c" {
		if err := cgen.CheckPrefix(*prefix); err != nil {
			return a.fail(exitUsage, "--prefix: %v", err)
		}
	}
	sol, _, status, err := loadSource(pos[0], *solverName, *reach)
	if err != nil {
		return a.fail(status, "%v", err)
	}
	if *format == "c" {
		dir := *out
		if dir == "" {
			dir = "."
		}
		code, err := cgen.Generate(sol, *prefix, cgen.Options{})
		if err != nil {
			return a.fail(exitMismatch, "%v", err)
		}
		if err := code.WriteFiles(dir); err != nil {
			return a.fail(exitMismatch, "writing C files: %v", err)
		}
		fmt.Fprintf(a.stdout, "Wrote %s and %s: worst-case regret of the 16-bit table %.9g%s (exact: %s)\n",
			filepath.Join(dir, code.HeaderName), filepath.Join(dir, code.SourceName),
			result.Float(code.Info.RegretUnits), unitSuffix(sol.Model), code.Info.RegretUnits.RatString())
		return exitOK
	}
	var buf bytes.Buffer
	opt := render.Options{ASCII: *ascii, Title: *title}
	switch *format {
	case "text":
		err = render.Text(&buf, sol, opt)
	case "csv":
		err = render.CSV(&buf, sol)
	case "json":
		err = render.JSON(&buf, sol)
	case "md":
		err = render.Markdown(&buf, sol, opt)
	case "html":
		err = render.HTML(&buf, sol, opt)
	}
	if err != nil {
		return a.fail(exitMismatch, "%v", err)
	}
	if *out == "" {
		a.stdout.Write(buf.Bytes())
		return exitOK
	}
	if err := result.WriteAtomic(*out, buf.Bytes()); err != nil {
		return a.fail(exitMismatch, "writing %s: %v", *out, err)
	}
	return exitOK
}

package main

import (
	"bytes"
	"context"
	"embed"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"

	"github.com/pickwise/pickwise/discretize/spec"
	"github.com/pickwise/pickwise/tables/cgen"
	"github.com/pickwise/pickwise/tables/plot"
	"github.com/pickwise/pickwise/tables/render"
	"github.com/pickwise/pickwise/tables/result"
)

// demoFS holds the demo model and its samples file (invented data).
//
//go:embed demo/gateway.toml demo/chain-3-errors.csv
var demoFS embed.FS

// demoOutputs lists the files the demo writes, in order.
var demoOutputs = []string{
	"gateway.toml", "chain-3-errors.csv", "result.json", "tables.csv",
	"procedure.md", "procedure.html", "gateway.h", "gateway.c", "rule.png",
}

// demoSolution solves the embedded demo model.
func demoSolution() (*result.Solution, *spec.File, error) {
	data, err := demoFS.ReadFile("demo/gateway.toml")
	if err != nil {
		return nil, nil, err
	}
	sub, err := fs.Sub(demoFS, "demo")
	if err != nil {
		return nil, nil, err
	}
	f, err := spec.Parse(data, "gateway.toml", sub)
	if err != nil {
		return nil, nil, err
	}
	m, err := f.Discretize()
	if err != nil {
		return nil, nil, err
	}
	s, err := result.Solve(context.Background(), m, result.Options{})
	return s, f, err
}

// writeDemo writes every demo output for solution s into dir.
func writeDemo(dir string, s *result.Solution, f *spec.File) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	var given bytes.Buffer
	if err := f.Encode(&given); err != nil {
		return err
	}
	for _, name := range []string{"gateway.toml", "chain-3-errors.csv"} {
		data, err := demoFS.ReadFile("demo/" + name)
		if err != nil {
			return err
		}
		if err := result.WriteAtomic(filepath.Join(dir, name), data); err != nil {
			return err
		}
	}
	if err := result.NewFile(s, given.String()).WriteFile(filepath.Join(dir, "result.json")); err != nil {
		return err
	}
	printed, err := render.Round(s)
	if err != nil {
		return err
	}
	opt := render.Options{Title: "Rooftop gateway: choosing a receive chain", Printed: printed}
	for _, out := range []struct {
		name  string
		write func(*bytes.Buffer) error
	}{
		{"tables.csv", func(b *bytes.Buffer) error { return render.CSV(b, s) }},
		{"procedure.md", func(b *bytes.Buffer) error { return render.Markdown(b, s, opt) }},
		{"procedure.html", func(b *bytes.Buffer) error { return render.HTML(b, s, opt) }},
	} {
		var b bytes.Buffer
		if err := out.write(&b); err != nil {
			return fmt.Errorf("%s: %w", out.name, err)
		}
		if err := result.WriteAtomic(filepath.Join(dir, out.name), b.Bytes()); err != nil {
			return err
		}
	}
	code, err := cgen.Generate(s, "gateway", cgen.Options{})
	if err != nil {
		return err
	}
	if err := code.WriteFiles(dir); err != nil {
		return err
	}
	return plot.Write(s, filepath.Join(dir, "rule.png"), plot.DefaultWidth, plot.DefaultHeight)
}

func runDemo(a *app, args []string) int {
	fs := a.flagSet("demo", "[-dir DIR]", `
Solve the built-in demo model, an invented scenario: a rooftop gateway reads
the signal strength of its three receive chains once per frame and switches
to the strongest. chain-1 has a calibrated detector (normal error, 0.8 dB),
chain-2 a skewed error measured on the bench (a pmf), chain-3 errors logged
against a reference meter (a samples file). Step 0.5 dB.

Prints the summary and the decision tables, and writes the model, the result
file, the CSV cells, the printable procedure (Markdown and HTML), the C pair
and a picture into DIR.`)
	dir := fs.String("dir", "pickwise-demo", "directory to write the outputs into")
	pos, st, done := a.parse(fs, args)
	if done {
		return st
	}
	if len(pos) != 0 {
		fs.Usage()
		return exitUsage
	}
	s, f, err := demoSolution()
	if err != nil {
		return a.fail(exitMismatch, "demo: %v", err)
	}
	fmt.Fprintln(a.stdout, "Demo: a rooftop gateway choosing among three receive chains (invented scenario).")
	fmt.Fprintln(a.stdout)
	writeSummary(a.stdout, s, true)
	fmt.Fprintln(a.stdout)
	if err := render.Text(a.stdout, s, render.Options{}); err != nil {
		return a.fail(exitMismatch, "demo: %v", err)
	}
	if err := writeDemo(*dir, s, f); err != nil {
		return a.fail(exitMismatch, "demo: writing %s: %v", *dir, err)
	}
	abs, _ := filepath.Abs(*dir)
	fmt.Fprintf(a.stdout, "\nWrote into %s:\n", abs)
	for _, name := range demoOutputs {
		fmt.Fprintf(a.stdout, "  %s\n", name)
	}
	fmt.Fprintf(a.stdout, "Re-check the certificate with: pickwise verify %s\n", filepath.Join(*dir, "result.json"))
	return exitOK
}

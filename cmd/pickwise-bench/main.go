// Command pickwise-bench measures pickwise on the scale cases and writes a
// Markdown report: for each case, the time and peak memory of pickwise
// (constraint generation) and of the direct LP solved by CLP, their ratio,
// the LP sizes, and the certified gap.
//
// Each solve runs as a separate "pickwise solve --json" process so that
// its peak memory, CLP's included, is measured from the operating system.
//
// Usage:
//
//	pickwise-bench -pickwise bin/pickwise -o bench/results.md [-timeout 10m] [-cases a,b]
//	pickwise-bench -models DIR   (writes the cases' model files and exits)
package main

import (
	"bytes"
	"context"
	"encoding/json"
	"flag"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"strings"
	"syscall"
	"time"
)

// benchCase is one model of the benchmark and its target.
type benchCase struct {
	name, target string
	model        func() string // TOML text
	// limit, when longer than -cg-limit, replaces it for this case: a
	// target time well past -cg-limit, less what the certificate and
	// the greedy and offset figures take after constraint generation.
	// Negative means none: the case is solved to its certified optimum
	// (and the figures then start alongside constraint generation).
	limit time.Duration
}

// pmfModel writes n channels with k-point pmfs of seeded random weights.
func pmfModel(n, k int, seed uint64) string {
	rng := rand.New(rand.NewPCG(seed, 1))
	var b strings.Builder
	b.WriteString("step = 1\n")
	for i := 0; i < n; i++ {
		fmt.Fprintf(&b, "[[channel]]\nname = \"c%d\"\nnoise = \"pmf\"\nvalues = [", i+1)
		lo := -rng.IntN(k)
		ws := make([]float64, k)
		var s float64
		for j := range ws {
			ws[j] = 0.1 + rng.Float64()
			s += ws[j]
		}
		for j := 0; j < k; j++ {
			if j > 0 {
				b.WriteString(", ")
			}
			fmt.Fprint(&b, lo+j)
		}
		b.WriteString("]\nprobs = [")
		var acc float64
		for j := 0; j < k; j++ {
			if j > 0 {
				b.WriteString(", ")
			}
			p := math.Round(ws[j]/s*1e12) / 1e12
			if j == k-1 {
				p = 1 - acc
			}
			acc += p
			fmt.Fprintf(&b, "%.12f", p)
		}
		b.WriteString("]\n")
	}
	return b.String()
}

func normalModel(step, tail float64, sigma ...float64) string {
	var b strings.Builder
	fmt.Fprintf(&b, "step = %g\ntail = %g\n", step, tail)
	for i, s := range sigma {
		fmt.Fprintf(&b, "[[channel]]\nname = \"c%d\"\nnoise = \"normal\"\nsigma = %g\n", i+1, s)
	}
	return b.String()
}

var cases = []benchCase{
	{"n2-normal-step0.01", "under 2 s", func() string { return normalModel(0.01, 1e-6, 0.1, 0.15) }, 0},
	{"n2-normal-0.8-1.0-step0.01", "under 2 s", func() string { return normalModel(0.01, 1e-6, 0.8, 1.0) }, 0},
	{"n3-pmf15", "20x faster than the direct LP", func() string { return pmfModel(3, 15, 15) }, 0},
	{"n3-normal-step0.1", "under 60 s, 4 GiB", func() string { return normalModel(0.1, 1e-6, 0.8, 1.0, 1.6) }, 0},
	{"n4-pmf15", "under 120 s", func() string { return pmfModel(4, 15, 4) }, 0},
	// Five channels: solved to the certified optimum, in about 5 to 6
	// minutes (32 million configurations).
	{"n5-pmf5", "under 300 s", func() string { return pmfModel(5, 5, 5) }, -1},
}

// selected reports whether case name is in the comma-separated list only
// (every case when only is empty).
func selected(only, name string) bool {
	return only == "" || strings.Contains(","+only+",", ","+name+",")
}

// run is the outcome of one solve.
type run struct {
	ok                      bool
	status                  string
	seconds                 float64
	peakMiB                 float64
	rows, columns, nonzeros int
	gap, upper              float64
	converged               bool
	rounds                  int
}

func solve(bin, model string, timeout time.Duration, args ...string) run {
	ctx, cancel := context.WithTimeout(context.Background(), timeout)
	defer cancel()
	cmd := exec.CommandContext(ctx, bin, append(append([]string{"solve", "--json", "--quiet"}, args...), model)...)
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	start := time.Now()
	err := cmd.Run()
	r := run{seconds: time.Since(start).Seconds()}
	if ps := cmd.ProcessState; ps != nil {
		if ru, ok := ps.SysUsage().(*syscall.Rusage); ok {
			r.peakMiB = float64(ru.Maxrss) / 1024
		}
	}
	if ctx.Err() != nil {
		r.status = fmt.Sprintf("stopped after %s", timeout)
		return r
	}
	if err != nil {
		r.status = "failed: " + strings.TrimSpace(errb.String())
		return r
	}
	var v struct {
		Lower, Upper float64
		LP           struct {
			Rows, Columns, Nonzeros, Rounds int
			Converged                       bool
		}
	}
	var raw map[string]json.RawMessage
	json.Unmarshal(out.Bytes(), &raw)
	json.Unmarshal(raw["lower_bound"], &v.Lower)
	json.Unmarshal(raw["upper_bound"], &v.Upper)
	json.Unmarshal(raw["lp"], &v.LP)
	r.ok, r.status = true, "ok"
	r.rows, r.columns, r.nonzeros = v.LP.Rows, v.LP.Columns, v.LP.Nonzeros
	r.gap, r.upper = v.Upper-v.Lower, v.Upper
	r.converged, r.rounds = v.LP.Converged, v.LP.Rounds
	return r
}

func main() {
	bin := flag.String("pickwise", "bin/pickwise", "the pickwise binary")
	out := flag.String("o", "bench/results.md", "report to write")
	timeout := flag.Duration("timeout", 10*time.Minute, "time limit of each solve")
	only := flag.String("cases", "", "comma-separated case names (default: all)")
	cgLimit := flag.Duration("cg-limit", 0, "pass --time-limit to the constraint-generation solves (0: none)")
	models := flag.String("models", "", "write the model files of the cases into this directory and exit")
	flag.Parse()
	if *models != "" {
		for _, c := range cases {
			if err := os.WriteFile(filepath.Join(*models, c.name+".toml"), []byte(c.model()), 0o644); err != nil {
				fmt.Fprintln(os.Stderr, err)
				os.Exit(1)
			}
		}
		return
	}
	dir, err := os.MkdirTemp("", "pickwise-bench")
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	defer os.RemoveAll(dir)
	var b strings.Builder
	fmt.Fprintf(&b, "# Benchmarks\n\nMade by `make bench` (cmd/pickwise-bench) on %d cores, %s/%s. Each solve is a separate `pickwise solve --json` process with a limit of %s; peak memory is its maximum resident set, CLP included. \"pickwise\" is `--method cg` (constraint generation, fast evaluator, certificate); \"direct\" is `--method direct` (every configuration's row, solved by CLP).\n\n",
		runtime.NumCPU(), runtime.GOOS, runtime.GOARCH, *timeout)
	if *cgLimit > 0 {
		fmt.Fprintf(&b, "Constraint generation ran with `--time-limit %s`", *cgLimit)
		for _, c := range cases {
			if c.limit > *cgLimit && selected(*only, c.name) {
				fmt.Fprintf(&b, " (%s: `%s`, its target less what the certificate takes)", c.name, c.limit)
			}
			if c.limit < 0 && selected(*only, c.name) {
				fmt.Fprintf(&b, " (%s: none, to the certified optimum)", c.name)
			}
		}
		b.WriteString(": a solve that reached it reports the certified interval of the best rule found (\"converged\" no).\n\n")
	}
	b.WriteString("| case | target | pickwise s | pickwise MiB | direct s | direct MiB | ratio | rounds | converged | rows (cg / direct) | columns | nonzeros (cg / direct) | certified gap | worst case |\n")
	b.WriteString("| --- | --- | ---: | ---: | ---: | ---: | ---: | ---: | --- | --- | ---: | --- | ---: | ---: |\n")
	var notes []string
	for _, c := range cases {
		if !selected(*only, c.name) {
			continue
		}
		path := filepath.Join(dir, c.name+".toml")
		if err := os.WriteFile(path, []byte(c.model()), 0o644); err != nil {
			fmt.Fprintln(os.Stderr, err)
			os.Exit(1)
		}
		fmt.Fprintf(os.Stderr, "%s: pickwise...\n", c.name)
		args := []string{"--method", "cg"}
		if *cgLimit > 0 && c.limit >= 0 {
			args = append(args, "--time-limit", max(*cgLimit, c.limit).String())
		}
		p := solve(*bin, path, *timeout, args...)
		fmt.Fprintf(os.Stderr, "%s: %s in %.1f s; direct...\n", c.name, p.status, p.seconds)
		d := solve(*bin, path, *timeout, "--method", "direct")
		fmt.Fprintf(os.Stderr, "%s: direct %s in %.1f s\n", c.name, d.status, d.seconds)
		cell := func(r run, x float64, f string) string {
			if !r.ok {
				return "-"
			}
			return fmt.Sprintf(f, x)
		}
		// A failed solve shows a short status in its time column and its
		// message below the table, without the temporary directory.
		status := func(r run, who string) string {
			if r.ok {
				return fmt.Sprintf("%.2f", r.seconds)
			}
			if strings.HasPrefix(r.status, "failed: ") {
				msg := strings.ReplaceAll(strings.TrimPrefix(r.status, "failed: "), dir+string(filepath.Separator), "")
				notes = append(notes, fmt.Sprintf("- %s, %s: %s", c.name, who, msg))
				return fmt.Sprintf("failed after %.1f s (see below)", r.seconds)
			}
			return r.status
		}
		ratio := "-"
		if p.ok && d.ok {
			ratio = fmt.Sprintf("%.1f", d.seconds/p.seconds)
		} else if p.ok && !d.ok && strings.HasPrefix(d.status, "stopped") {
			ratio = fmt.Sprintf("> %.1f", d.seconds/p.seconds)
		}
		conv := "-"
		if p.ok {
			conv = map[bool]string{true: "yes", false: "no"}[p.converged]
		}
		fmt.Fprintf(&b, "| %s | %s | %s | %.0f | %s | %.0f | %s | %d | %s | %d / %d | %d | %d / %d | %s | %s |\n",
			c.name, c.target, status(p, "pickwise"), p.peakMiB, status(d, "direct"), d.peakMiB, ratio, p.rounds, conv,
			p.rows, d.rows, p.columns, p.nonzeros, d.nonzeros, cell(p, p.gap, "%.2g"), cell(p, p.upper, "%.9g"))
	}
	if len(notes) > 0 {
		b.WriteString("\nMessages of the solves that failed:\n\n")
		for _, n := range notes {
			b.WriteString(n + "\n")
		}
	}
	if err := os.MkdirAll(filepath.Dir(*out), 0o755); err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	if err := os.WriteFile(*out, []byte(b.String()), 0o644); err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	fmt.Fprintf(os.Stderr, "wrote %s\n", *out)
}

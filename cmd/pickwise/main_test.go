package main

import (
	"bytes"
	"encoding/json"
	"flag"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

var updateGolden = flag.Bool("update-golden", false, "rewrite the demo's golden files")

// run runs the command line and returns its exit status and output.
func run(args ...string) (int, string, string) {
	var out, errb bytes.Buffer
	st := newApp(&out, &errb).run(args)
	return st, out.String(), errb.String()
}

func TestHelp(t *testing.T) {
	st, out, _ := run("help")
	if st != 0 || !strings.Contains(out, "Commands:") {
		t.Fatalf("help: status %d, output %q", st, out)
	}
	for _, c := range []string{"solve", "verify", "table", "plot", "lp", "demo"} {
		t.Run(c, func(t *testing.T) {
			st, out, errs := run(c, "--help")
			if st != 0 || strings.Count(out, "Usage: pickwise "+c) != 1 || errs != "" {
				t.Errorf("%s --help: status %d, output %q, errors %q (want the usage once, on standard output)", c, st, out, errs)
			}
			st, _, errs = run(c, "--no-such-flag")
			if st != exitUsage || strings.Count(errs, "Usage: pickwise "+c) != 1 || !strings.Contains(errs, "no-such-flag") {
				t.Errorf("%s --no-such-flag: status %d, errors %q (want the error and the usage once)", c, st, errs)
			}
			st2, out2, _ := run("help", c)
			if st2 != 0 || out2 != out {
				t.Errorf("help %s differs from %s --help", c, c)
			}
		})
	}
	if st, _, _ := run("frobnicate"); st != exitUsage {
		t.Errorf("unknown command: status %d, want %d", st, exitUsage)
	}
	if st, _, _ := run(); st != exitUsage {
		t.Errorf("no command: status %d, want %d", st, exitUsage)
	}
}

// writeModel writes a model file into a temporary directory.
func writeModel(t *testing.T, text string) string {
	t.Helper()
	p := filepath.Join(t.TempDir(), "model.toml")
	if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

const twoChannels = `step = 1
unit = "mm"
[[channel]]
name = "ref"
noise = "exact"
[[channel]]
name = "coin"
noise = "pmf"
values = [-1, 1]
probs = [0.5, 0.5]
`

// TestBadInput: each bad model gets one message naming the file, the
// channel and the field, and exit status 2.
func TestBadInput(t *testing.T) {
	for _, tc := range []struct {
		name, model string
		want        []string
	}{
		{"zero step", strings.Replace(twoChannels, "step = 1", "step = 0", 1), []string{"model.toml", `"step"`}},
		{"unknown kind", strings.Replace(twoChannels, `noise = "exact"`, `noise = "gaussian"`, 1), []string{`channel "ref"`, `"noise"`}},
		{"off lattice", strings.Replace(twoChannels, "values = [-1, 1]", "values = [-1, 1.5]", 1), []string{`channel "coin"`, `"values"`, "1.5"}},
		{"probabilities", strings.Replace(twoChannels, "probs = [0.5, 0.5]", "probs = [0.5, 0.6]", 1), []string{`channel "coin"`, `"probs"`}},
		{"duplicate name", strings.Replace(twoChannels, `name = "coin"`, `name = "ref"`, 1), []string{`"name"`, "ref"}},
		{"unknown key", strings.Replace(twoChannels, `unit = "mm"`, "unit = \"mm\"\nspeed = 3", 1), []string{`"speed"`}},
		{"one channel", "step = 1\n[[channel]]\nnoise = \"exact\"\n", []string{"model.toml", "two"}},
		{"negative sigma", "step = 1\n[[channel]]\nnoise = \"exact\"\n[[channel]]\nname = \"n\"\nnoise = \"normal\"\nsigma = -1\n", []string{`channel "n"`, `"sigma"`}},
		{"missing samples file", "step = 1\n[[channel]]\nnoise = \"exact\"\n[[channel]]\nname = \"s\"\nnoise = \"samples\"\nfile = \"nowhere.csv\"\n", []string{`channel "s"`, `"file"`}},
		{"not TOML", "step = = 1", []string{"model.toml"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			p := writeModel(t, tc.model)
			st, out, errs := run("solve", p)
			if st != exitUsage {
				t.Fatalf("status %d, want %d; stderr %q", st, exitUsage, errs)
			}
			if out != "" {
				t.Errorf("wrote to standard output: %q", out)
			}
			if strings.Count(strings.TrimSpace(errs), "\n") != 0 {
				t.Errorf("want one line, got %q", errs)
			}
			for _, w := range tc.want {
				if !strings.Contains(errs, w) {
					t.Errorf("message %q does not name %s", errs, w)
				}
			}
		})
	}
	t.Run("missing file", func(t *testing.T) {
		if st, _, errs := run("solve", filepath.Join(t.TempDir(), "none.toml")); st != exitUsage || !strings.Contains(errs, "none.toml") {
			t.Errorf("status %d, message %q", st, errs)
		}
	})
	t.Run("unknown solver", func(t *testing.T) {
		if st, _, _ := run("solve", "--solver", "simplex", writeModel(t, twoChannels)); st != exitUsage {
			t.Errorf("status %d", st)
		}
	})
}

// TestSolveJSON checks the keys of solve --json on the worked example
// (A exact, B with noise -1/+1; optimum exactly 1/4, derived by hand in
// lp/minimax's tests), with both backends.
func TestSolveJSON(t *testing.T) {
	p := writeModel(t, twoChannels)
	for _, solver := range []string{"clp", "gonum"} {
		st, out, errs := run("solve", "--json", "--solver", solver, p)
		if st != 0 {
			t.Fatalf("%s: status %d: %s", solver, st, errs)
		}
		var v map[string]any
		if err := json.Unmarshal([]byte(out), &v); err != nil {
			t.Fatal(err)
		}
		for _, k := range []string{"optimal_regret", "greedy_regret", "offset_regret", "lower_bound", "upper_bound"} {
			if _, ok := v[k].(float64); !ok {
				t.Errorf("%s: key %s missing or not a number", solver, k)
			}
		}
		if v["optimal_regret"] != 0.25 || v["lower_bound"] != 0.25 || v["upper_bound"] != 0.25 {
			t.Errorf("%s: optimum %v [%v, %v], want 1/4", solver, v["optimal_regret"], v["lower_bound"], v["upper_bound"])
		}
		if offs, ok := v["offsets"].([]any); !ok || len(offs) != 2 {
			t.Errorf("%s: offsets %v", solver, v["offsets"])
		}
		cert, _ := v["certificate"].(map[string]any)
		if cert["lower"] != "1/4" || cert["upper"] != "1/4" {
			t.Errorf("%s: certificate %v", solver, cert)
		}
	}
}

// TestVerifyStatuses: 0 for a file as written, 1 for a changed one, 2 for
// an unreadable one.
func TestVerifyStatuses(t *testing.T) {
	dir := t.TempDir()
	res := filepath.Join(dir, "r.json")
	if st, _, errs := run("solve", "-o", res, writeModel(t, twoChannels)); st != 0 {
		t.Fatalf("solve: %d %s", st, errs)
	}
	if st, out, _ := run("verify", res); st != 0 || !strings.Contains(out, "verified") {
		t.Fatalf("verify: status %d, %q", st, out)
	}
	data, _ := os.ReadFile(res)
	bad := filepath.Join(dir, "bad.json")
	os.WriteFile(bad, bytes.Replace(data, []byte(`"1/4"`), []byte(`"1/5"`), 1), 0o644)
	if st, out, _ := run("verify", bad); st != exitMismatch || !strings.Contains(out, "MISMATCH") {
		t.Errorf("changed file: status %d, %q", st, out)
	}
	junk := filepath.Join(dir, "junk.json")
	os.WriteFile(junk, []byte("{not json"), 0o644)
	if st, _, _ := run("verify", junk); st != exitUsage {
		t.Errorf("unreadable file: status %d", st)
	}
	if st, _, _ := run("verify", filepath.Join(dir, "missing.json")); st != exitUsage {
		t.Errorf("missing file: status %d", st)
	}
}

// TestDemoGolden runs the demo and compares every output with the golden
// files, byte for byte (outputs are deterministic).
func TestDemoGolden(t *testing.T) {
	s, f, err := demoSolution()
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	if err := writeDemo(dir, s, f); err != nil {
		t.Fatal(err)
	}
	golden := filepath.Join("testdata", "demo")
	if *updateGolden {
		os.MkdirAll(golden, 0o755)
	}
	for _, name := range demoOutputs {
		got, err := os.ReadFile(filepath.Join(dir, name))
		if err != nil {
			t.Fatal(err)
		}
		if *updateGolden {
			if err := os.WriteFile(filepath.Join(golden, name), got, 0o644); err != nil {
				t.Fatal(err)
			}
			continue
		}
		want, err := os.ReadFile(filepath.Join(golden, name))
		if err != nil {
			t.Fatalf("%v (run go test -run DemoGolden -update-golden)", err)
		}
		if !bytes.Equal(got, want) {
			t.Errorf("%s differs from its golden file", name)
		}
	}
	// The demo's result file verifies, and its C pair compiles cleanly.
	if st, out, _ := run("verify", filepath.Join(dir, "result.json")); st != 0 {
		t.Errorf("verify demo result: %d %s", st, out)
	}
	cc, err := exec.LookPath("cc")
	if err != nil {
		t.Skip("no C compiler")
	}
	cmd := exec.Command(cc, "-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic", "-c", "-o", filepath.Join(dir, "gateway.o"), filepath.Join(dir, "gateway.c"))
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Errorf("demo C source does not compile: %v\n%s", err, out)
	}
}

// TestTableAndPlotCommands: each table format and both picture formats
// are written from a result file.
func TestTableAndPlotCommands(t *testing.T) {
	dir := t.TempDir()
	res := filepath.Join(dir, "r.json")
	if st, _, errs := run("solve", "-o", res, writeModel(t, twoChannels)); st != 0 {
		t.Fatalf("solve: %d %s", st, errs)
	}
	for _, f := range []string{"text", "csv", "json", "md", "html"} {
		out := filepath.Join(dir, "t."+f)
		if st, _, errs := run("table", res, "--format", f, "-o", out); st != 0 {
			t.Errorf("%s: status %d %s", f, st, errs)
		} else if fi, err := os.Stat(out); err != nil || fi.Size() == 0 {
			t.Errorf("%s: nothing written", f)
		}
	}
	if st, out, errs := run("table", res, "--format", "c", "--prefix", "pick", "-o", dir); st != 0 || !strings.Contains(out, "pick.h") {
		t.Errorf("c: status %d %q %s", st, out, errs)
	}
	if st, _, _ := run("table", res, "--format", "c", "--prefix", "9bad", "-o", dir); st != exitUsage {
		t.Errorf("bad prefix: status %d", st)
	}
	if st, _, _ := run("table", res, "--format", "pdf"); st != exitUsage {
		t.Errorf("unknown format: status %d", st)
	}
	for _, ext := range []string{"png", "svg"} {
		out := filepath.Join(dir, "p."+ext)
		if st, _, errs := run("plot", res, "-o", out); st != 0 {
			t.Errorf("plot %s: status %d %s", ext, st, errs)
		}
	}
	mps := filepath.Join(dir, "m.mps")
	if st, _, errs := run("lp", writeModel(t, twoChannels), "-o", mps); st != 0 {
		t.Errorf("lp: status %d %s", st, errs)
	}
}

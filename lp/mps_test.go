package lp_test

import (
	"bufio"
	"bytes"
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/pickwise/pickwise/lp"
	"github.com/pickwise/pickwise/lp/clp"
	"github.com/pickwise/pickwise/lp/internal/lptest"
)

func TestWriteMPSText(t *testing.T) {
	inf := math.Inf(1)
	p := &lp.Problem{}
	p.AddCol(2, 1, inf)         // LO
	p.AddCol(3, -inf, inf)      // FR
	p.AddCol(-1, -inf, 4)       // MI, UP
	p.AddCol(0, 0, inf)         // default bounds, in no row
	p.AddCol(0.1, 2.5, 2.5)     // FX
	p.AddCol(1e-300, 0, 0.5)    // UP only
	p.AddCol(1.0/3, -1.5, -0.5) // UP then LO, both negative
	p.AddRow([]int{0, 1, 2}, []float64{1, 1, 1}, 10, 10)
	p.AddRow([]int{1, 2}, []float64{1, -1}, -5, 2)
	p.AddRow([]int{4, 6}, []float64{0.7, -2}, -inf, 0)
	p.AddRow([]int{5}, []float64{1}, -inf, inf)
	var buf bytes.Buffer
	if err := lp.WriteMPS(&buf, p, "demo"); err != nil {
		t.Fatal(err)
	}
	want := `NAME demo
ROWS
 N OBJ
 E R0
 G R1
 L R2
 N R3
COLUMNS
 C0 OBJ 2
 C0 R0 1
 C1 OBJ 3
 C1 R0 1
 C1 R1 1
 C2 OBJ -1
 C2 R0 1
 C2 R1 -1
 C3 OBJ 0
 C4 OBJ 0.1
 C4 R2 0.7
 C5 OBJ 1e-300
 C5 R3 1
 C6 OBJ 0.3333333333333333
 C6 R2 -2
RHS
 RHS R0 10
 RHS R1 -5
RANGES
 RNG R1 7
BOUNDS
 LO BND C0 1
 FR BND C1
 MI BND C2
 UP BND C2 4
 FX BND C4 2.5
 UP BND C5 0.5
 UP BND C6 -0.5
 LO BND C6 -1.5
ENDATA
`
	if got := buf.String(); got != want {
		t.Errorf("got\n%s\nwant\n%s", got, want)
	}
}

func TestWriteMPSErrors(t *testing.T) {
	inf := math.Inf(1)
	cases := []struct {
		name  string
		build func(p *lp.Problem)
		pname string
	}{
		{"column fixed at infinity", func(p *lp.Problem) { p.AddCol(0, inf, inf) }, "x"},
		{"row fixed at minus infinity", func(p *lp.Problem) {
			p.AddCol(0, 0, 1)
			p.AddRow([]int{0}, []float64{1}, -inf, -inf)
		}, "x"},
		{"name with a space", func(p *lp.Problem) { p.AddCol(0, 0, 1) }, "a b"},
		{"invalid problem", func(p *lp.Problem) { p.Obj = append(p.Obj, 1) }, "x"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			p := &lp.Problem{}
			c.build(p)
			if err := lp.WriteMPS(&bytes.Buffer{}, p, c.pname); err == nil {
				t.Error("no error")
			}
		})
	}
}

// glpkResult is what glpsol reports in its plain-text solution file.
type glpkResult struct {
	primal, dual byte // solution status letters: f feasible, n none, ...
	obj          float64
	rowDual      []float64 // per row glpsol kept (free rows are dropped)
	x            []float64
}

// solveGLPK writes p as free MPS and solves it with GLPK's glpsol, an
// independent LP code, without presolve so that the status letters are
// final.
func solveGLPK(t *testing.T, p *lp.Problem) glpkResult {
	t.Helper()
	dir := t.TempDir()
	mps := filepath.Join(dir, "p.mps")
	f, err := os.Create(mps)
	if err != nil {
		t.Fatal(err)
	}
	if err := lp.WriteMPS(f, p, "test"); err != nil {
		t.Fatal(err)
	}
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
	sol := filepath.Join(dir, "p.sol")
	out, err := exec.Command("glpsol", "--freemps", mps, "--min", "--nopresol", "-w", sol).CombinedOutput()
	if err != nil {
		t.Fatalf("glpsol: %v\n%s", err, out)
	}
	data, err := os.ReadFile(sol)
	if err != nil {
		t.Fatal(err)
	}
	// Plain-text solution format of glpsol -w: "s bas m n pst dst obj",
	// then "i row stat value dual" per row and "j col stat value dual" per
	// column.
	var r glpkResult
	sc := bufio.NewScanner(bytes.NewReader(data))
	for sc.Scan() {
		fs := strings.Fields(sc.Text())
		if len(fs) == 0 {
			continue
		}
		num := func(s string) float64 {
			v, err := strconv.ParseFloat(s, 64)
			if err != nil {
				t.Fatalf("glpsol solution line %q: %v", sc.Text(), err)
			}
			return v
		}
		switch {
		case fs[0] == "s" && len(fs) == 7:
			r.primal, r.dual, r.obj = fs[4][0], fs[5][0], num(fs[6])
		case fs[0] == "i" && len(fs) == 5:
			r.rowDual = append(r.rowDual, num(fs[4]))
		case fs[0] == "j" && len(fs) == 5:
			r.x = append(r.x, num(fs[3]))
		}
	}
	return r
}

// TestMPSWithGLPK writes the hand-solved problems and random ones as MPS,
// solves them with glpsol, and compares GLPK's status, objective, primal
// values and row duals with the hand solutions and with CLP.
func TestMPSWithGLPK(t *testing.T) {
	if _, err := exec.LookPath("glpsol"); err != nil {
		t.Skip("glpsol (GLPK) is not on PATH")
	}
	for _, c := range lptest.Hand() {
		t.Run(c.Name, func(t *testing.T) {
			g := solveGLPK(t, c.Problem)
			switch c.Status {
			case lp.Infeasible:
				if g.primal != 'n' {
					t.Errorf("glpsol primal status %c, want n (no feasible solution)", g.primal)
				}
				return
			case lp.Unbounded:
				if g.primal != 'f' || g.dual != 'n' {
					t.Errorf("glpsol status %c %c, want f n (unbounded)", g.primal, g.dual)
				}
				return
			}
			if g.primal != 'f' || g.dual != 'f' {
				t.Fatalf("glpsol status %c %c, want optimal", g.primal, g.dual)
			}
			if math.Abs(g.obj-c.Objective) > 1e-9 {
				t.Errorf("glpsol objective %g, hand %g", g.obj, c.Objective)
			}
			for j, want := range c.X {
				if math.Abs(g.x[j]-want) > 1e-9 {
					t.Errorf("glpsol x[%d] = %g, hand %g", j, g.x[j], want)
				}
			}
			// GLPK's row duals use the convention of lp.Solution
			// (d objective / d bound); glpsol drops free rows.
			if c.RowDual != nil {
				var want []float64
				for i, y := range c.RowDual {
					if !math.IsInf(c.Problem.RowLo[i], -1) || !math.IsInf(c.Problem.RowUp[i], 1) {
						want = append(want, y)
					}
				}
				if len(g.rowDual) != len(want) {
					t.Fatalf("glpsol reports %d rows, want %d", len(g.rowDual), len(want))
				}
				for i := range want {
					if math.Abs(g.rowDual[i]-want[i]) > 1e-9 {
						t.Errorf("glpsol row dual %d = %g, hand %g", i, g.rowDual[i], want[i])
					}
				}
			}
		})
	}
	rng := rand.New(rand.NewPCG(21, 22))
	for k := range 12 {
		t.Run(fmt.Sprint("random ", k), func(t *testing.T) {
			p, _ := lptest.Boxed(rng, 10+rng.IntN(60), 10+rng.IntN(60), 0.2)
			want, err := clp.Solver{}.Solve(context.Background(), p)
			if err != nil {
				t.Fatal(err)
			}
			g := solveGLPK(t, p)
			if g.primal != 'f' || g.dual != 'f' {
				t.Fatalf("glpsol status %c %c, want optimal", g.primal, g.dual)
			}
			if math.Abs(g.obj-want.Objective) > 1e-7*(1+math.Abs(want.Objective)) {
				t.Errorf("glpsol objective %.12g, clp %.12g", g.obj, want.Objective)
			}
		})
	}
}

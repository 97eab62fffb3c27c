package discretize

import (
	"errors"
	"testing"
)

// FuzzLattice checks the continuous kinds on arbitrary parameters: no
// panic, every refusal a *ParamError, Check and Lattice agree, and every
// accepted pmf is valid with a cut mass within the tail.
func FuzzLattice(f *testing.F) {
	f.Add(uint8(0), 1.0, 0.0, 3.0, 0.5, 1e-9)
	f.Add(uint8(1), 0.6, 0.1, 1.0, 0.25, 1e-3)
	f.Add(uint8(2), 0.4, -0.2, 1.0, 0.25, 0.1)
	f.Add(uint8(3), 1.1, 0.05, 1.0, 0.25, 1e-9)
	f.Add(uint8(4), 0.5, 0.3, 4.0, 0.25, 1e-9)
	f.Add(uint8(4), 1e-3, 0.0, 0.7, 1.0, 1e-4)
	f.Fuzz(func(t *testing.T, kind uint8, scale, mean, df, step, tail float64) {
		var n Noise
		switch kind % 5 {
		case 0:
			n = Normal{Sigma: scale, Mean: mean}
		case 1:
			n = Laplace{Scale: scale, Mean: mean}
		case 2:
			n = Logistic{Scale: scale, Mean: mean}
		case 3:
			n = Uniform{HalfWidth: scale, Mean: mean}
		case 4:
			n = Student{Scale: scale, DF: df, Mean: mean}
		}
		checkErr := n.Check(step, tail)
		p, cut, err := n.Lattice(step, tail)
		if (checkErr == nil) != (err == nil) {
			t.Fatalf("%#v: Check says %v, Lattice says %v", n, checkErr, err)
		}
		if err != nil {
			var pe *ParamError
			if !errors.As(err, &pe) {
				t.Fatalf("%#v: refusal %v is not a *ParamError", n, err)
			}
			return
		}
		if err := p.Check(); err != nil {
			t.Fatalf("%#v step %v tail %v: %v", n, step, tail, err)
		}
		if !(cut >= 0 && cut <= tail*(1+1e-6)) {
			t.Fatalf("%#v step %v tail %v: cut %v", n, step, tail, cut)
		}
	})
}

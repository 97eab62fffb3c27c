package result

import (
	"context"

	"github.com/pickwise/pickwise/lp"
	"github.com/pickwise/pickwise/lp/clp"
	"github.com/pickwise/pickwise/lp/dw"
	"github.com/pickwise/pickwise/lp/minimax"
)

// clpIncremental adapts a CLP model to minimax.Incremental.
type clpIncremental struct{ m *clp.Model }

// newCLPIncremental loads p into a new CLP model.
func newCLPIncremental(tol float64) func(p *lp.Problem) (minimax.Incremental, error) {
	return func(p *lp.Problem) (minimax.Incremental, error) {
		m, err := clp.NewModel(p)
		if err != nil {
			return nil, err
		}
		m.PrimalTolerance, m.DualTolerance = tol, tol
		return clpIncremental{m}, nil
	}
}

func (c clpIncremental) AddColumns(lo, up, obj []float64) error { return c.m.AddColumns(lo, up, obj) }

func (c clpIncremental) AddRows(p *lp.Problem) error {
	return c.m.AddRows(clp.RowsOf(p))
}

func (c clpIncremental) Solve(ctx context.Context) (*lp.Solution, error) { return c.m.Solve(ctx) }

func (c clpIncremental) Close() { c.m.Close() }

// newDWIncremental loads p into a decomposition model (lp/dw).
func newDWIncremental(p *lp.Problem) (minimax.Incremental, error) {
	return dw.New(p)
}

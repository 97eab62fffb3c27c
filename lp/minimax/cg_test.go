package minimax_test

import (
	"context"
	"fmt"
	"math"
	"testing"
	"time"

	"github.com/pickwise/pickwise/lp"
	"github.com/pickwise/pickwise/lp/clp"
	"github.com/pickwise/pickwise/lp/minimax"
	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/fast"
)

// stopAt is a CLP model whose solve number stop fails as a solve cut
// short by a deadline would.
type stopAt struct {
	m      *clp.Model
	solves int
	stop   int
}

func (s *stopAt) AddColumns(lo, up, obj []float64) error { return s.m.AddColumns(lo, up, obj) }
func (s *stopAt) AddRows(p *lp.Problem) error {
	return s.m.AddRows(clp.RowsOf(p))
}
func (s *stopAt) Close() { s.m.Close() }
func (s *stopAt) Solve(ctx context.Context) (*lp.Solution, error) {
	s.solves++
	if s.solves == s.stop {
		return nil, fmt.Errorf("clp: solve interrupted: %w", context.DeadlineExceeded)
	}
	return s.m.Solve(ctx)
}

// TestCGDeadline: when the time limit interrupts an LP solve, constraint
// generation returns the rule of the last completed round, unconverged,
// and that rule is the one whose worst case it reports (cells that the
// interrupted round added pick as missing cells do); when it interrupts
// the first solve, there is no rule and the error says so.
func TestCGDeadline(t *testing.T) {
	m := model(t, 1, []float64{-2, 0.1, 0.3, 0.2, 0.4}, []float64{0, 0.6, 0.25, 0.15}, []float64{-1, 0.5, 0.1, 0.4})
	l, err := tables.NewLayout(m)
	if err != nil {
		t.Fatal(err)
	}
	full, err := minimax.SolveCG(context.Background(), l, newStopAt(0), minimax.CGOptions{Batch: 4})
	if err != nil {
		t.Fatal(err)
	}
	if full.Rounds < 3 {
		t.Fatalf("the model needs %d rounds; the test needs at least 3", full.Rounds)
	}
	far := minimax.CGOptions{Batch: 4, Deadline: time.Now().Add(time.Hour)}
	res, err := minimax.SolveCG(context.Background(), l, newStopAt(3), far)
	if err != nil {
		t.Fatal(err)
	}
	if res.Converged || res.Rounds != 2 {
		t.Errorf("converged %v after %d rounds, want false after 2", res.Converged, res.Rounds)
	}
	if err := res.F.Tables.Check(1e-9); err != nil {
		t.Fatal(err)
	}
	w, err := fast.WorstCase(l, res.F.Tables, l.D)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(w.Regret-res.WorstCase) > 1e-12*res.WorstCase {
		t.Errorf("returned rule has worst case %.15g, round 2 reported %.15g", w.Regret, res.WorstCase)
	}
	if res.WorstCase < full.WorstCase*(1-1e-9) {
		t.Errorf("stopped early with worst case %.15g, below the converged %.15g", res.WorstCase, full.WorstCase)
	}
	if _, err := minimax.SolveCG(context.Background(), l, newStopAt(1), far); err == nil {
		t.Error("a deadline during the first solve gave no error")
	}
}

func newStopAt(stop int) func(*lp.Problem) (minimax.Incremental, error) {
	return func(p *lp.Problem) (minimax.Incremental, error) {
		m, err := clp.NewModel(p)
		if err != nil {
			return nil, err
		}
		m.PrimalTolerance, m.DualTolerance = 1e-9, 1e-9
		return &stopAt{m: m, stop: stop}, nil
	}
}

package plot

import (
	"math"
	"testing"

	"github.com/pickwise/pickwise/tables/result"
)

func TestPairData(t *testing.T) {
	cases := []struct {
		name   string
		step   float64
		greedy float64 // worst case of greedy, reading units
	}{
		// Design notes, "Check values": greedy's worst case at step h is
		// (1-h)/2 (worked example, derived by hand).
		{"step 1/2", 0.5, 0.25},
		{"step 1/4", 0.25, 0.375},
		// At step 1 the only confusable values are 1 apart and B's low
		// reading ties with A: greedy errs with probability 1/4, a regret
		// of 1/4 (derived by hand).
		{"step 1", 1, 0.25},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			sol := solve(t, coinModel(t, tc.step))
			pd := newPairData(sol)
			h := tc.step

			// Worked example: the optimum is 1/4 at every step that
			// divides 1 (design notes).
			if got := maxOf(pd.regret[ruleOptimal]) * h; math.Abs(got-0.25) > 1e-9 {
				t.Errorf("largest regret of the optimal table = %.12g, want 1/4", got)
			}
			if got := maxOf(pd.regret[ruleGreedy]) * h; math.Abs(got-tc.greedy) > 1e-12 {
				t.Errorf("largest regret of greedy = %.12g, want %g", got, tc.greedy)
			}
			// With two channels every configuration is a value
			// difference, so each curve's largest value is the rule's
			// exact worst case as certified by the solve.
			figs := [3]result.Figure{sol.Optimal, sol.Greedy, sol.Offset}
			for j, f := range figs {
				want := result.Float(f.Regret)
				if got := maxOf(pd.regret[j]); math.Abs(got-want) > 1e-9*want {
					t.Errorf("rule %d: largest regret on the curve %.15g steps, exact worst case %.15g", j, got, want)
				}
			}
			// Regret is zero at equal values and at both ends of the
			// range shown.
			for j := range pd.regret {
				r := pd.regret[j]
				for k, d := range pd.vals {
					if d == 0 && r[k] != 0 {
						t.Errorf("rule %d: regret %g at equal values", j, r[k])
					}
				}
				if r[0] != 0 || r[len(r)-1] != 0 {
					t.Errorf("rule %d: regret %g and %g at the ends of the range", j, r[0], r[len(r)-1])
				}
			}

			// Choice: probabilities sum to 1; beyond the noise ranges the
			// choice is forced, and the range shows forced cells on both
			// sides.
			l := sol.Layout
			lo, hi := l.Lo[1]-l.Hi[0], l.Hi[1]-l.Lo[0]
			if pd.diffs[0] >= lo || pd.diffs[len(pd.diffs)-1] <= hi {
				t.Errorf("differences %d..%d do not extend beyond the table %d..%d", pd.diffs[0], pd.diffs[len(pd.diffs)-1], lo, hi)
			}
			for k, d := range pd.diffs {
				pa, pb := pd.pick[0][k], pd.pick[1][k]
				if math.Abs(pa+pb-1) > 1e-12 {
					t.Errorf("difference %d: probabilities %g + %g", d, pa, pb)
				}
				if d < lo && pa != 1 || d > hi && pb != 1 {
					t.Errorf("difference %d: forced cell picks A with %g, B with %g", d, pa, pb)
				}
			}
			if h == 1 {
				// Derived by hand from the regret at values 1 and 2
				// apart staying at most 1/4: the table shares equal
				// readings 1/2-1/2, picks B with at least 3/4 one step
				// above A and at most 1/4 one step below.
				pb := map[int]float64{}
				for k, d := range pd.diffs {
					pb[d] = pd.pick[1][k]
				}
				if math.Abs(pb[0]-0.5) > 1e-9 || pb[1] < 0.75-1e-9 || pb[-1] > 0.25+1e-9 {
					t.Errorf("P(B) at differences -1, 0, 1 = %g, %g, %g", pb[-1], pb[0], pb[1])
				}
			}
		})
	}
}

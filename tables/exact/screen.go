package exact

import (
	"math/big"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/fast"
)

// floatRule presents an exact rule to the float evaluators.
type floatRule struct {
	r   Rule
	den float64
}

// Floater is implemented by exact rules that have a float form of their
// own, cheaper to evaluate than converting every Nums: its probabilities
// must equal Nums/Den to within a few units of float64 round-off.
type Floater interface {
	Float() tables.Rule
}

// Float returns the float form of the greedy or offset rule.
func (s shareRule) Float() tables.Rule {
	if s.half == nil {
		return tables.Greedy{}
	}
	return tables.Offset{Half: s.half}
}

// Float returns the float form of a table rule: its tables when their
// probabilities are within 1e-15 of the numerators over the denominator,
// otherwise the numerators converted at each lookup.
func (t *Table) Float() tables.Rule {
	if t.near {
		return t.O
	}
	return floatRule{t, float64(t.Den())}
}

func (f floatRule) Probs(r []int, p []float64) {
	var q [16]uint64
	f.r.Nums(r, q[:len(r)])
	for i := range p {
		p[i] = float64(q[i]) / f.den
	}
}

// ScreenTol is the relative margin of the float screen: a bound on the
// relative error of a regret from the fast evaluator. The fast evaluator
// sums non-negative terms, so its relative error is a small multiple of
// the number of terms times 2^-53; 1e-9 leaves a margin of several orders
// of magnitude for every model pickwise can solve.
const ScreenTol = 1e-9

// WorstCaseScreened returns the same exact worst case as WorstCase, with
// the same configuration, but evaluates exactly only the configurations
// whose float regret, from the fast evaluator, comes within a relative
// 1e-9 of the float maximum. Every other configuration is below the
// maximum by far more than the float error, so it cannot reach it. Like
// the fast evaluator it needs a translation-invariant rule (every rule of
// package tables is one): the exact regrets are summed over the joint pmf
// of the noise differences.
func WorstCaseScreened(l *tables.Layout, rule Rule, d int) (Worst, error) {
	var fr tables.Rule = floatRule{rule, float64(rule.Den())}
	if f, ok := rule.(Floater); ok {
		fr = f.Float()
	}
	cands, err := fast.Candidates(l, fr, d, ScreenTol, ScreenTol)
	if err != nil {
		return Worst{}, err
	}
	return WorstCaseAmong(l, rule, cands), nil
}

// WorstCaseAmong returns the largest exact regret of rule over the
// configurations cands (in the form the fast evaluator reports them:
// values from 0, tables.Far outside their subset), the first of them, in
// their order, that has it. When cands hold every configuration that can
// reach the rule's worst case, in the enumeration order of the evaluators
// (fast.SortConfigs), the result is WorstCase's; WorstCaseScreened finds
// such candidates with a float screen. Like the fast evaluator it needs a
// translation-invariant rule. No candidates give a regret of 0.
func WorstCaseAmong(l *tables.Layout, rule Rule, cands [][]int) Worst {
	num := nums(l)
	n := l.N()
	var best *big.Int
	var bestV []int
	var bestQ tables.Set
	val := new(big.Int)
	// The exact difference pmf of each subset, built when a candidate of
	// it first needs it: a candidate then costs one rule lookup per
	// difference vector instead of one per joint outcome.
	diffs := make(map[tables.Set]*diffPMF)
	for _, v := range cands {
		q := tables.SubsetOf(v)
		mem := q.Members()
		dp := diffs[q]
		if dp == nil {
			dp = exactDifferences(l, num, mem)
			diffs[q] = dp
		}
		regretNumDiff(l, dp, rule, v, val)
		val.Lsh(val, uint(discretize.DenomBits*(n-len(mem))))
		if best == nil || val.Cmp(best) > 0 {
			best, bestV, bestQ = new(big.Int).Set(val), v, q
		}
	}
	if best == nil {
		return Worst{Regret: new(big.Rat)}
	}
	scale := new(big.Int).Lsh(new(big.Int).SetUint64(rule.Den()), uint(discretize.DenomBits*n))
	return Worst{Regret: new(big.Rat).SetFrac(best, scale), Values: bestV, Subset: bestQ}
}

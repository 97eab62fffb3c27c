// Package fast evaluates a rule's regret at every configuration at once,
// using the product structure of the noise instead of summing over joint
// noise outcomes one configuration at a time.
//
// For a subset Q = {q_0 < q_1 < ... < q_k} of channels, a rule that
// depends only on reading differences picks channel i with probability
// X_i(D) at reading differences D_c = r_(q_c) - r_(q_0), c = 1..k (the
// channels outside Q read tables.Far). At value differences
// u_c = v_(q_c) - v_(q_0) the probability of picking i is
//
//	P_i(u) = sum_(a_0) p_0(a_0) Y_i(u - a_0 (1, ..., 1)),
//	Y_i(w) = sum_(a_1..a_k) p_1(a_1) ... p_k(a_k) X_i(w + a),
//
// so Y_i is a separable correlation of X_i with the noise pmfs of q_1..q_k
// (one pass along each axis) and P_i one more pass along the diagonal with
// the pmf of q_0. The regret at u is sum_i (max u - u_i) P_i(u).
//
// The cost per subset is the number of difference vectors that the
// configurations reach through the noise times the sum of the noise
// spreads, instead of the number of configurations times the product of
// the spreads. Each pass computes only the values that the configurations
// need, and channel i only where it is not the highest and where its
// values can be nonzero (near readings where the rule picks it); large
// boxes are split into tiles that fit a memory budget.
//
// Every sum has non-negative terms in a fixed order, so results do not
// depend on the number of goroutines or tiles, and the relative error of a
// regret is at most about (L + m) units of float64 round-off, L the total
// length of the m members' noise pmfs: far below that of the direct sum
// over joint outcomes, whose error grows with their number.
//
// The rules evaluated must be translation invariant (see Regrets); every
// rule of package tables is.
package fast

import (
	"fmt"
	"math"
	"runtime"
	"sort"
	"sync/atomic"

	"github.com/pickwise/pickwise/tables"
)

// DefaultMaxBytes is the memory budget of an Evaluator whose MaxBytes is
// zero: 1 GiB.
const DefaultMaxBytes = 1 << 30

// Evaluator holds the resource limits of an evaluation. The zero value is
// ready to use: a budget of DefaultMaxBytes and runtime.GOMAXPROCS(0)
// goroutines.
type Evaluator struct {
	// MaxBytes bounds the work arrays of one evaluation, in bytes. A
	// subset whose box of difference vectors does not fit is evaluated in
	// tiles; 0 means DefaultMaxBytes.
	MaxBytes int64
	// Workers is the number of goroutines; 0, or more than
	// runtime.GOMAXPROCS(0), means runtime.GOMAXPROCS(0).
	Workers int
}

func (e Evaluator) maxBytes() int64 {
	if e.MaxBytes <= 0 {
		return DefaultMaxBytes
	}
	return e.MaxBytes
}

func (e Evaluator) workers() int {
	w := runtime.GOMAXPROCS(0)
	if e.Workers > 0 && e.Workers < w {
		w = e.Workers
	}
	return w
}

// check validates the arguments shared by every entry point.
func check(l *tables.Layout, rule tables.Rule, d int) error {
	if l == nil {
		return fmt.Errorf("fast: nil layout")
	}
	if rule == nil {
		return fmt.Errorf("fast: nil rule")
	}
	if d < 0 {
		return fmt.Errorf("fast: negative gap bound %d", d)
	}
	return nil
}

// Regrets calls fn with the regret, in steps, of rule at every
// configuration of subset q with sorted consecutive value gaps of at most d
// steps: the configurations of tables.Configurations(l.N(), q, d, ...),
// each exactly once. v has length l.N() with tables.Far outside q; fn must
// not keep it. fn is called from the calling goroutine, in a deterministic
// order: tile by tile, and within a tile in increasing lexicographic order
// of the value differences v_(q_c) - v_(q_0) (not the order of
// tables.Configurations).
//
// rule must be translation invariant: shifting the readings of the
// channels of q by a common amount, the others staying at tables.Far, must
// not change its probabilities. Every rule of package tables is.
func (e Evaluator) Regrets(l *tables.Layout, rule tables.Rule, q tables.Set, d int, fn func(v []int, regret float64)) error {
	return e.regrets(l, rule, q, d, new(work), fn)
}

// Scan appends the regret of rule at every configuration of subset q (the
// configurations of Regrets, in its order) to regs and returns the
// extended slice. For each configuration where pick(at, regret) is true,
// at being its index in that slice, it calls fn(at, v, regret), in the
// same order, from the calling goroutine; v is as for Regrets. pick is
// called from several goroutines at once, possibly more than once for a
// configuration, and must give the same answer each time.
//
// A caller that keeps every regret but looks closely at few
// configurations spends far less time here than with Regrets, which calls
// a function for every configuration from one goroutine (five channels
// with 5-point pmfs: 31 million configurations).
func (e Evaluator) Scan(l *tables.Layout, rule tables.Rule, q tables.Set, d int, regs []float64, pick func(at int, regret float64) bool, fn func(at int, v []int, regret float64)) ([]float64, error) {
	s, err := e.newSubset(l, rule, q, d, new(work))
	if err != nil {
		return regs, err
	}
	return s.scan(regs, true, pick, fn)
}

// newSubset checks the arguments and returns the evaluation of subset q
// with the work arrays of w.
func (e Evaluator) newSubset(l *tables.Layout, rule tables.Rule, q tables.Set, d int, w *work) (*subset, error) {
	if err := check(l, rule, d); err != nil {
		return nil, err
	}
	if q.Len() < 2 || q>>uint(l.N()) != 0 {
		return nil, fmt.Errorf("fast: subset %v is not a set of at least two of the %d channels", q.Members(), l.N())
	}
	s, err := newSubset(l, rule, q, d, e.workers(), e.maxBytes())
	if err != nil {
		return nil, err
	}
	s.work = w
	return s, nil
}

// regrets is Regrets with the work arrays of w.
func (e Evaluator) regrets(l *tables.Layout, rule tables.Rule, q tables.Set, d int, w *work, fn func(v []int, regret float64)) error {
	s, err := e.newSubset(l, rule, q, d, w)
	if err != nil {
		return err
	}
	return s.run(fn)
}

// WorstCase returns the worst-case regret of rule over every configuration
// of every subset of at least two channels whose sorted consecutive value
// gaps are at most d steps, like tables.Layout.WorstCase: among
// configurations whose regrets are equal as float64 values it keeps the
// first in the enumeration order of tables.Subsets and
// tables.Configurations. Worst.Configurations counts the configurations.
// rule must be translation invariant (see Regrets).
func (e Evaluator) WorstCase(l *tables.Layout, rule tables.Rule, d int) (tables.Worst, error) {
	if err := check(l, rule, d); err != nil {
		return tables.Worst{}, err
	}
	var w tables.Worst
	found := false
	var arrays work
	for _, q := range tables.Subsets(l.N()) {
		mem := q.Members()
		same := false // whether w holds a configuration of q
		err := e.regrets(l, rule, q, d, &arrays, func(v []int, reg float64) {
			w.Configurations++
			if !found || reg > w.Regret || (reg == w.Regret && same && earlier(v, w.Values, mem)) {
				found, same = true, true
				w.Regret, w.Subset = reg, q
				w.Values = append(w.Values[:0], v...)
			}
		})
		if err != nil {
			return tables.Worst{}, err
		}
	}
	return w, nil
}

// Candidates returns every configuration, over every subset of at least
// two channels with sorted value gaps of at most d steps, whose float64
// regret is at least M - tol - rel*M, where M is the largest float64
// regret (tol >= 0, 0 <= rel < 1), in the enumeration order of
// tables.Subsets and tables.Configurations; the first of them with the
// largest regret is WorstCase's configuration. It takes one pass over the
// configurations.
//
// If every float64 regret is within e of the true regret, a margin of 2e
// keeps every configuration that can reach the true worst case, so an
// exact evaluation of the candidates alone finds it.
func (e Evaluator) Candidates(l *tables.Layout, rule tables.Rule, d int, tol, rel float64) ([][]int, error) {
	if err := check(l, rule, d); err != nil {
		return nil, err
	}
	if !(tol >= 0) || math.IsInf(tol, 1) {
		return nil, fmt.Errorf("fast: tolerance %g is not a finite number >= 0", tol)
	}
	if !(rel >= 0 && rel < 1) {
		return nil, fmt.Errorf("fast: relative tolerance %g is not in [0, 1)", rel)
	}
	// floor is the least regret kept while the largest is top; it rises
	// with top, so a configuration below it stays below the final one.
	floor := func(top float64) float64 { return top - tol - rel*top }
	type cand struct {
		v   []int
		reg float64
	}
	var list []cand
	top := math.Inf(-1)
	// The evaluation's goroutines read the floor of the top so far: a
	// configuration below it is below the final floor, and the few
	// above it are reported, from this goroutine, one at a time.
	var least atomic.Uint64
	least.Store(math.Float64bits(math.Inf(-1)))
	limit := 1024
	prune := func() {
		k := 0
		for _, c := range list {
			if c.reg >= floor(top) {
				list[k] = c
				k++
			}
		}
		clear(list[k:])
		list = list[:k]
	}
	var arrays work
	for _, q := range tables.Subsets(l.N()) {
		s, err := e.newSubset(l, rule, q, d, &arrays)
		if err != nil {
			return nil, err
		}
		pick := func(_ int, reg float64) bool { return reg >= math.Float64frombits(least.Load()) }
		_, err = s.scan(nil, false, pick, func(_ int, v []int, reg float64) {
			if reg < floor(top) {
				return
			}
			if reg > top {
				top = reg
				least.Store(math.Float64bits(floor(top)))
			}
			list = append(list, cand{append([]int(nil), v...), reg})
			if len(list) >= limit {
				prune()
				limit = max(limit, 2*len(list))
			}
		})
		if err != nil {
			return nil, err
		}
	}
	prune()
	out := make([][]int, len(list))
	for i, c := range list {
		out[i] = c.v
	}
	SortConfigs(l.N(), out)
	return out, nil
}

// SortConfigs sorts configurations of n channels, in the form the
// evaluators report them (tables.Far outside their subset), into the order
// in which the evaluators enumerate them: by subset in the order of
// tables.Subsets, then as tables.Configurations enumerates a subset's.
// Candidates returns its configurations in this order.
func SortConfigs(n int, vs [][]int) {
	index := make(map[tables.Set]int)
	for i, q := range tables.Subsets(n) {
		index[q] = i
	}
	type keyed struct {
		sub int
		q   tables.Set
		v   []int
	}
	ks := make([]keyed, len(vs))
	for i, v := range vs {
		q := tables.SubsetOf(v)
		ks[i] = keyed{index[q], q, v}
	}
	sort.SliceStable(ks, func(a, b int) bool {
		if ks[a].sub != ks[b].sub {
			return ks[a].sub < ks[b].sub
		}
		return earlier(ks[a].v, ks[b].v, ks[a].q.Members())
	})
	for i, k := range ks {
		vs[i] = k.v
	}
}

// Regrets calls Evaluator{}.Regrets.
func Regrets(l *tables.Layout, rule tables.Rule, q tables.Set, d int, fn func(v []int, regret float64)) error {
	return Evaluator{}.Regrets(l, rule, q, d, fn)
}

// WorstCase calls Evaluator{}.WorstCase.
func WorstCase(l *tables.Layout, rule tables.Rule, d int) (tables.Worst, error) {
	return Evaluator{}.WorstCase(l, rule, d)
}

// Candidates calls Evaluator{}.Candidates.
func Candidates(l *tables.Layout, rule tables.Rule, d int, tol, rel float64) ([][]int, error) {
	return Evaluator{}.Candidates(l, rule, d, tol, rel)
}

// earlier reports whether configuration a comes before configuration b of
// the same subset (members mem) in the enumeration order of
// tables.Configurations: first by the sorted values, lexicographically,
// then by the values in member order, lexicographically.
func earlier(a, b []int, mem []int) bool {
	var sa, sb [16]int
	m := len(mem)
	for k, c := range mem {
		sa[k], sb[k] = a[c], b[c]
	}
	sortSmall(sa[:m])
	sortSmall(sb[:m])
	for k := 0; k < m; k++ {
		if sa[k] != sb[k] {
			return sa[k] < sb[k]
		}
	}
	for _, c := range mem {
		if a[c] != b[c] {
			return a[c] < b[c]
		}
	}
	return false
}

// sortSmall sorts a short slice in increasing order.
func sortSmall(x []int) {
	for i := 1; i < len(x); i++ {
		for j := i; j > 0 && x[j] < x[j-1]; j-- {
			x[j], x[j-1] = x[j-1], x[j]
		}
	}
}

package minimax

import (
	"context"
	"errors"
	"fmt"
	"math"
	"slices"
	"sort"
	"time"

	"github.com/pickwise/pickwise/lp"
	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/fast"
)

// Incremental is an LP model that keeps its basis between solves: rows
// added after a solve are handled from the previous basis (the dual simplex
// warm start of CLP, for example).
type Incremental interface {
	// AddColumns appends len(lo) columns in no row, with bounds
	// lo[k] <= x <= up[k] and costs obj[k].
	AddColumns(lo, up, obj []float64) error
	// AddRows appends the rows of p (its columns are ignored; the column
	// indices must exist in the model).
	AddRows(p *lp.Problem) error
	// Solve solves the model from its current basis.
	Solve(ctx context.Context) (*lp.Solution, error)
	// Close frees the model.
	Close()
}

// CGOptions control constraint generation.
type CGOptions struct {
	// Tol is the relative tolerance of the stopping test: stop when no
	// configuration's regret exceeds the LP value by more than
	// Tol*(LP value) + 1e-12 steps. Zero means 1e-10.
	Tol float64
	// Batch is the number of most violated configurations added per
	// subset and round; zero means 128. The initial working set takes
	// fewer per subset where its rows are long (see SolveCG).
	// (Three channels with 15-point pmfs: 32 took 15 rounds and 7.9 s,
	// 128 took 8 rounds and 5.9 s, 512 took 6 rounds and 29 s, the LP
	// solves growing slow. With shaped rounds (see Shaper), four
	// channels with 15-point pmfs: 128 took 9 rounds and 49 s, 46 took
	// 10 rounds and 60 s; five channels with 5-point pmfs: 128 and 200
	// reach about the same gaps in the same time.)
	Batch int
	// MaxRounds stops after this many rounds (zero: 1000).
	MaxRounds int
	// Deadline, when not zero, stops the loop after the round that passes
	// it, or interrupts the LP solve that passes it; the result then holds
	// the best rule of the completed rounds (see CGResult.F), with
	// Converged false. A
	// deadline that passes before the first LP solve ends is an error.
	Deadline time.Time
	// Progress, when not nil, is called after every round.
	Progress func(Progress)
	// Evaluator evaluates rules at every configuration.
	Evaluator fast.Evaluator
	// Radius spreads the configurations added in a round: of two
	// violated configurations within Radius steps of each other in every
	// channel, only the more violated is added. Zero means an eighth of
	// the smallest noise spread; negative means no spreading.
	// (Three channels with normal noise at step 0.1: a quarter reached
	// a worst case within 0.001 steps of the optimum in about 100 s, an
	// eighth within 0.0003 in 81 s, a sixteenth filled the batch with
	// neighbours and stalled; three channels with 15-point pmfs: 1.4 s
	// at a quarter, 0.9 s at an eighth.)
	Radius int
	// NoSymmetry ignores that channels with identical noise are
	// interchangeable (see Options.NoSymmetry).
	NoSymmetry bool
	// Half, when not nil, holds an offset per channel, in half steps:
	// cells without columns pick as the offset rule does, the alive
	// channel with the highest reading plus its offset (the tables' Half),
	// and so does the rule before the first round. Nil means the highest
	// reading. With noise that is biased or unequal the offset rule's
	// offsets (tables.Layout.OffsetHalfSteps) start the loop from a far
	// better rule than the highest reading, and its configurations where
	// the working set has not reached stay at the offset rule's regret.
	// Channels with identical noise must have equal offsets unless
	// NoSymmetry is set.
	Half []int
	// Split is the number of configurations from which every round that
	// is not shaped (the first, and those after a shaped round without
	// violated configurations or with a stalled gap), with a Shaper
	// model, solves its LP twice: exactly, for the bound, then shaped
	// around the best rule, and goes on with the shaped rule (see
	// splitConfigs); when the working set has not grown since the last
	// exact solve, the round is shaped alone. Zero means splitConfigs;
	// negative means never.
	Split int
}

// Progress reports one round of constraint generation, in steps.
type Progress struct {
	Round      int
	Configs    int     // configurations in the working set
	LPValue    float64 // optimum over the working set: a lower bound on the restricted optimum
	WorstCase  float64 // worst case of the round's rule
	Best       float64 // worst case of the best rule so far: an upper bound
	Violations int     // configurations above the LP value by more than the tolerance
	// Shaped says the round solved the shaped LP (see Shaper): LPValue
	// is then the largest regret of the round's rule over the working
	// set, at least the working set's optimum, not a lower bound.
	Shaped  bool
	Elapsed time.Duration
}

// CGResult is the outcome of SolveCG.
type CGResult struct {
	// F is the final formulation: its rows are the working set; its
	// tables hold the best rule found: the last round's when the loop
	// converged on it, otherwise the mixture of the rounds' rules and
	// the highest reading with the least worst case.
	F *Formulation
	// Solution is the LP solution of the round, exact or shaped (see
	// Shaper), whose prior has the highest Bayes risk
	// (Formulation.PriorValue): its duals give the best prior found. It
	// can be what a solve cut short by the deadline returned with its
	// error (see lp/dw's Model.Solve): then X is nil. The Objective of a
	// shaped or cut-short solution is its prior's Bayes risk.
	Solution *lp.Solution
	// WorstCase is the fast evaluator's worst case of the rule in F's
	// tables, in steps.
	WorstCase float64
	Rounds    int
	Converged bool
	// Near holds every configuration, in the form and order in which the
	// fast evaluator reports them (fast.SortConfigs), where the fast
	// evaluator's regret of the rule in F's tables is at least
	// (1-NearRel)*WorstCase, and perhaps a few more: the only ones that
	// can reach the rule's exact worst case when the float regrets are
	// within a relative NearRel/2 of the exact ones, so that an exact
	// evaluation of them alone (exact.WorstCaseAmong) finds it without
	// another pass over every configuration. It is nil when the loop did
	// not keep them (see maxNear).
	Near [][]int
}

// NearRel is the relative margin of CGResult.Near.
const NearRel = 1e-4

// maxNear bounds the configurations that one round keeps for
// CGResult.Near; past it the result has no Near.
const maxNear = 1 << 20

// In-out separation (Ben-Ameur and Neto, Networks 49(1), 2007): while the
// best rule's worst case exceeds the LP value by more than inOutGap of it,
// the violated configurations added in a round are those where a mixture
// of the best rule (weight inOutWeight) and the round's rule is worst, not
// those where the round's rule alone is: the round's rule, optimal on the
// working set only, is often far worse elsewhere than any rule near the
// optimum, and its worst places say little about where the optimum's are.
// Near the optimum the round's rule's own violations close the gap faster.
// (Five channels with 5-point pmfs: a certified gap of 0.13 steps after
// 130 s instead of 0.18 with the plain ranking, the LP value 0.615 after
// eight rounds instead of 0.594; a weight of 0.5 gave 0.15, 0.95 gave
// 0.14. Four channels with 15-point pmfs: the offset rule's worst case is
// 25% above the first LP value, and this first round alone brings 10
// rounds and 844 configurations instead of 11 and 1,016; with the weight
// on in every round 13 rounds. Three channels of normal noise at step
// 0.1, whose gap is 3% from the start: 15 rounds either way, 23 with the
// weight on throughout. Random pmfs, where the offset rule starts 30% to
// 130% above the first LP value: four channels with 7-point pmfs 54 s
// instead of 147 s, five with 3-point pmfs a gap of 0.040 instead of 0.066
// after 200 s, but four with 9-point pmfs 30 s instead of 13 s.)
const (
	inOutWeight = 0.8
	inOutGap    = 0.15
)

// Shaper is an Incremental model whose program can be shaped between
// solves: column costs added to the objective (minimise t + c·x, see
// lp/dw) and the relative tolerance of a solve (0: the model's default).
type Shaper interface {
	SetCosts(c []float64) error
	SetTolerance(tol float64)
}

// Shaped rounds: every round after the first whose rule is not to be
// the working set's optimum solves, with a Shaper model, a proximal
// version of the working set's LP: minimise t plus a cost of mu steps per
// unit of probability that a cell moves away from the best rule so far
// (per column, mu times one less the best rule's probability of that
// choice), to a relative tolerance of a tenth of the relative gap between
// the best rule's worst case and the lower bound (below), at most
// shapeTol. mu is shapeBias while that gap is over shapeRel of the bound
// and shrinks with it below, but only in the cells that the prior of the
// last exact round reaches (Formulation.reachedColumns); elsewhere it
// stays shapeBias until the gap is under shapeAll of the bound, and
// shrinks with it below (see shapeAll). The best rule is randomised in some cells, which the
// linear cost pulls towards their likelier choice, and that pull must
// fade for the best rule to reach the optimum; but the optimum need not be
// randomised where a least favourable prior does not reach (every
// minimax rule is a Bayes rule of every least favourable prior, and only
// in the cells it reaches), and there a faded cost left the rounds' rules
// free to move cells for the slightest gain on the working set, at a
// large cost to the configurations outside it. (Five channels with
// 5-point pmfs, one terminal run of 10 minutes each: a certified gap of
// 4.5e-6 steps instead of 1.2e-5; after 5 minutes the best rule at
// 0.63557 instead of 0.63570, the rounds' rules within 0.005 of it
// instead of up to 0.04; the same rounds to 4 minutes. Three channels of
// normal noise: 13 rounds and 15 s instead of 16 and 19 s; four channels
// with 15-point pmfs unchanged; two random four-channel models with
// 7-point pmfs: 7 rounds instead of 8 and 12, 8.8 s and 6.5 s instead of
// 8.2 s and 8.1 s; five random channels with 3-point pmfs, whose gap
// stays over 1% for 150 s, unchanged. Tried and not kept, on five
// channels: making the non-Bayes columns of the cells such a prior
// reaches dear (the working set's LP grew slow), and giving the best
// rule's probabilities to the cells the round's prior does not reach
// (worse rules in every round); a fade in the reached cells from a gap of
// 5% on (better in rounds 10 and 12, worse in 11 and 14); a knee of 5%
// for the stall rule too (an exact round at round 10, 85 s, whose bound
// was already the optimum's, and worse rules by 5 minutes).)
//
// The LP over a working set has a vast set of optimal rules, and an
// optimal vertex takes, in cells that the prior's configurations reach
// with tiny probability, whatever choice helps them by a hair, however
// bad for the configurations outside the working set that reach those
// cells often: the exact round's rule is then far worse than the best
// rule over all configurations (five channels with 5-point pmfs: worst
// case 1.2 to 2.4 steps against an LP value of 0.64). Plain constraint
// generation is Kelley's cutting-plane method on the rule's worst case,
// and those jumps are its well-known weakness; the cost makes each round
// a step of a proximal bundle method instead, which keeps the round's
// rule near the best one except where moving pays, and the best rule
// improves every round. The shaped LP's value is not a lower bound: the
// lower bound is the Bayes risk of a round's prior (Formulation.PriorValue),
// exact or shaped, and the solution whose prior gives the highest is the
// one returned (the certificate's prior). A round is exact when the round
// before was shaped and found no violated configuration, or narrowed a
// small gap too little (see the end of the loop): its value is the
// working set's optimum. The loop ends when the best rule's worst case is
// within the tolerance of the lower bound, or an exact round's rule is
// optimal.
// (Five channels with 5-point pmfs: a certified gap of 0.0033 steps, [0.6355, 0.6388], after
// 240 s instead of 0.073. Four channels with 15-point pmfs: 9 rounds and
// 49 s instead of 7 and 83 s; three channels of normal noise at step 0.1:
// 16 s and 1.7 GiB instead of 45 s and 3.1 GiB. Five channels, other
// settings, one terminal run each of 240 s: a shapeBias of 3e-7 or 3e-6
// left gaps of 0.0048 and 0.0062; a shapeTol of 3e-3 left 0.0019, one
// round more in the time but no better round by round: not kept on one
// run. A shapeBias of 1e-5 or 1e-4, two runs side by side: the rounds'
// rules were no longer worse than the best rule, but the best rules were
// no better round by round (0.7303 after round 4 against 0.7314) and the
// LP solves took up to twice as long.)
//
// The first round: the exact solution's rule is wild outside the working
// set (five channels with 5-point pmfs: a worst case of 2.26 steps against
// an LP value of 0.6355; the best mixture of it and the offset rule 0.825).
// With at least splitConfigs configurations the first round solves its LP
// twice, exactly for the bound and then shaped around the offset rule, and
// goes on with the shaped rule; so do the later exact rounds, around the
// best rule. (Five channels, 31 million configurations:
// the shaped rule's worst case 0.806, the best rule 0.781; after 240 s a
// certified gap of 0.0017 steps, [0.63550, 0.63723], instead of 0.0032,
// [0.63550, 0.63873], in runs of 12 rounds each on the same day. A shaped
// first round alone, without the exact solve, took 32 s instead of 50 s
// and reached a best rule of 0.63617 by 240 s, but its prior's bound was
// 0.63286. On the smaller models the exact rule does better: three
// channels of normal noise took 19 rounds and 29 s instead of 13 and 22 s,
// three with 15-point pmfs 8 rounds instead of 5; four with 15-point pmfs
// were unchanged, 8 rounds. The later exact rounds of five channels: the
// first, after round 9, took 68 s and its rule's worst case was 1.9 steps;
// split, it went on with a shaped rule whose worst case was 0.635542, its
// LP value, with no violated configuration, and the certified gap after
// 240 s was 1.2e-5 steps, [0.6355301, 0.6355421], instead of 1.4e-4.
// Solving the exact LP in a new model, without the cuts of the shaped
// rounds, took 96 s instead of 68 s.)
const splitConfigs = 10_000_000

const (
	shapeBias = 1e-6
	shapeTol  = 1e-3
	shapeRel  = 0.01
)

// shapeAll is the relative gap under which the shaped rounds' cost fades
// in every cell, not only in those the last exact prior reaches: near the
// optimum the full cost elsewhere holds the shaped rule's worst case on
// the working set above the working set's optimum by about the cost of
// the cells it must move. (Five channels with 5-point pmfs, 10 minutes:
// the best rule stalled at 0.6355364, 6.3e-6 steps above the bound, in
// rounds of 80 s; with the cost faded everywhere below this gap, and the
// exact solve skipped when the working set had not changed since the last
// one, the certified gap was 1.5e-8 steps, [0.6355300975, 0.6355301129].
// The rules of the rounds are wild again, 0.64 to 0.76 steps, but the
// best rule, their mixture with the one before, improves every round. A
// gap of 1e-3 instead, which fades the cost from round 9 on: after 240 s
// a certified gap of 2.5e-5 steps, against 1.2e-5 in the best run with
// 1e-4, the best rule after the split exact round 0.63562 against
// 0.63554.)
const shapeAll = 1e-4

// splitTol returns the relative tolerance of the exact solve of a split
// round (see splitConfigs), with worst the best rule's worst case and lb
// the lower bound (0 for none yet): a tenth of their relative gap,
// between 1e-11 (the exact solves of the other rounds) and 1e-4. That
// solve gives the bound and the cells its prior reaches, not the rule;
// a bound within a tenth of the gap holds the gap up no more than the
// shaped rounds' own tolerance does, and the later solves tighten it as
// the gap shrinks. (Five channels with 5-point pmfs: the first exact solve
// took 9 s instead of 20 s. With a hundredth, later ones took about 23 s
// instead of 68 to 100 s, and, with the best rule's worst case taken as
// the largest regret of the mixture (see bestMix) rather than floored at
// the LP value, the certified gap after a time limit of 270 s was 2.1e-8
// steps in 291 s in all, against 1.2e-5 before, and 8.3e-9 after 420 s;
// with a tenth the loop converged: the certified optimum, a gap of 8e-13
// steps, [0.63553009746642, 0.635530097467252], after 22 rounds and 311
// s of constraint generation, about 330 s in all.)
func splitTol(worst, lb float64) float64 {
	return min(1e-4, max(1e-11, relGap(worst, lb)/10))
}

// relGap returns the gap between the best rule's worst case and the lower
// bound lb relative to lb, or 1 while there is no bound (lb 0). It is at
// least 0: a bound can pass the best rule's worst case by a rounding.
func relGap(worst, lb float64) float64 {
	if lb <= 0 {
		return 1
	}
	return max(0, (worst-lb)/lb)
}

// solveBy solves the model, stopping at the deadline when it is not zero.
func solveBy(ctx context.Context, m Incremental, deadline time.Time) (*lp.Solution, error) {
	if !deadline.IsZero() {
		var cancel context.CancelFunc
		ctx, cancel = context.WithDeadline(ctx, deadline)
		defer cancel()
	}
	return m.Solve(ctx)
}

// near reports whether configurations u and v differ by at most r steps in
// every channel (Far in the same channels).
func near(u, v []int, r int) bool {
	for i := range u {
		if d := u[i] - v[i]; d > r || d < -r {
			return false
		}
	}
	return true
}

// configKey identifies a configuration by its values (tables.Far outside
// its subset); pickwise supports at most 16 channels.
type configKey [16]int64

func keyOf(v []int) configKey {
	var k configKey
	for i, x := range v {
		k[i] = int64(x)
	}
	return k
}

// SolveCG solves the LP of layout l by constraint generation: it solves
// over a working set of configurations, evaluates the resulting rule at
// every configuration with the fast evaluator, adds the most violated ones,
// and re-solves from the previous basis, until no configuration's regret
// exceeds the LP value by more than the tolerance. Cells get columns when
// a configuration of the working set first reaches them; a cell without a
// column picks as tables.Optimal does for a missing cell (the alive channel
// with the highest reading), and the evaluation of every configuration
// accounts for that, so the final rule is the one certified.
func SolveCG(ctx context.Context, l *tables.Layout, newModel func(*lp.Problem) (Incremental, error), opt CGOptions) (*CGResult, error) {
	start := time.Now()
	tol := opt.Tol
	if tol == 0 {
		tol = 1e-10
	}
	batch := opt.Batch
	if batch == 0 {
		batch = 128
	}
	maxRounds := opt.MaxRounds
	if maxRounds == 0 {
		maxRounds = 1000
	}
	n := l.N()
	if opt.Half != nil && len(opt.Half) != n {
		return nil, fmt.Errorf("constraint generation: %d offsets for %d channels", len(opt.Half), n)
	}
	f := newFormulation(l, opt.NoSymmetry)
	if f.sym != nil && opt.Half != nil {
		for _, p := range f.sym.perms {
			for i, j := range p {
				if opt.Half[i] != opt.Half[j] {
					return nil, fmt.Errorf("constraint generation: channels %d and %d have identical noise but offsets %d and %d half steps", i, j, opt.Half[i], opt.Half[j])
				}
			}
		}
	}
	f.Tables.Half = slices.Clone(opt.Half)
	// canon maps a configuration to the one whose row stands for its
	// orbit under the symmetry (itself without one).
	cv := make([]int, n)
	canon := func(v []int) []int {
		if f.sym == nil {
			return v
		}
		f.sym.canonConfig(v, cv)
		return cv
	}
	inSet := make(map[configKey]bool)
	radius := opt.Radius
	if radius == 0 {
		w := l.Hi[0] - l.Lo[0]
		for i := range l.Lo {
			w = min(w, l.Hi[i]-l.Lo[i])
		}
		radius = w / 8
	}

	type scored struct {
		v   []int
		reg float64
	}
	// pending collects the rows of configurations to add.
	pending := &lp.Problem{}
	// add adds the rows of the configurations not yet in the working set
	// (their canonical ones), in order, computing them in parallel.
	add := func(list []scored) {
		var vs [][]int
		for _, s := range list {
			v := canon(s.v)
			k := keyOf(v)
			if !inSet[k] {
				inSet[k] = true
				vs = append(vs, append([]int(nil), v...))
			}
		}
		f.addRegretRows(vs, pending)
	}

	// keep inserts configuration v with regret reg into list, which holds
	// at most size configurations, most violated first (of equal regrets
	// the earlier enumerated). The list stays spread out: of
	// configurations within the radius of each other only the most
	// violated stays, so that one round reaches every region where the
	// rule is bad, not just the neighbours of the worst configuration.
	keep := func(list []scored, size int, v []int, reg float64) []scored {
		if len(list) == size && reg <= list[size-1].reg {
			return list
		}
		if radius > 0 {
			for i := range list {
				if near(list[i].v, v, radius) {
					if reg <= list[i].reg {
						return list
					}
					list = append(list[:i], list[i+1:]...)
					break
				}
			}
		}
		if len(list) == size {
			list = list[:size-1]
		}
		k := sort.Search(len(list), func(i int) bool { return list[i].reg < reg })
		list = append(list, scored{})
		copy(list[k+1:], list[k:])
		list[k] = scored{append([]int(nil), v...), reg}
		return list
	}

	// worst collects, per subset, the configurations of rule with the
	// largest regrets above threshold, most violated first, and, when
	// prev is not nil, those where the regrets prev (of the best rule so
	// far, in the evaluator's order) are largest above it: the places
	// that hold the best rule's worst case up, which the round's rule may
	// not share.
	// With a weight lam > 0 the configurations above threshold are ranked
	// not by rule's regret r but by lam*prev + (1-lam)*r, the regret of a
	// mixture of the best rule and rule (in-out separation: see
	// inOutWeight).
	// regs receives the regret of every configuration, in the
	// evaluator's order (the same in every round).
	var regs []float64
	// nbr, when not nil, holds the configurations next to those the LP's
	// prior weighs (see neighbours); worst appends those it finds
	// violated to nbrList.
	var nbr map[configKey]bool
	var nbrList []scored
	// While nearCut > 0, worst also keeps, in nearV and their places in
	// the evaluator's order in nearAt, the configurations where rule or
	// prev come to nearCut or above, for CGResult.Near; nearFull says
	// that there were more than maxNear.
	var nearCut float64
	var nearV [][]int
	var nearAt []int
	nearFull := false
	worst := func(rule tables.Rule, threshold float64, prev []float64, lam float64, sizeOf func(tables.Set) int) ([]scored, float64, int, error) {
		var out []scored
		regs = regs[:0]
		top := 0.0
		count := 0
		isNear := func(at int, reg float64) bool {
			return nearCut > 0 && (reg >= nearCut || (prev != nil && prev[at] >= nearCut))
		}
		for _, q := range tables.Subsets(n) {
			size := sizeOf(q)
			list := make([]scored, 0, size)
			var also []scored // by prev
			from := len(regs)
			var err error
			regs, err = opt.Evaluator.Scan(l, rule, q, l.D, regs, func(at int, reg float64) bool {
				return reg > threshold || (prev != nil && prev[at] > threshold) || isNear(at, reg)
			}, func(at int, v []int, reg float64) {
				if isNear(at, reg) {
					if len(nearV) < maxNear {
						nearV = append(nearV, slices.Clone(v))
						nearAt = append(nearAt, at)
					} else {
						nearFull = true
					}
				}
				k := keyOf(canon(v))
				if inSet[k] {
					return
				}
				if nbr != nil && reg > threshold && nbr[k] {
					nbrList = append(nbrList, scored{append([]int(nil), v...), reg})
				}
				if reg > threshold {
					count++
					if lam > 0 {
						list = keep(list, size, v, lam*prev[at]+(1-lam)*reg)
					} else {
						list = keep(list, size, v, reg)
					}
				}
				if prev != nil && prev[at] > threshold {
					also = keep(also, max(1, size/2), v, prev[at])
				}
			})
			if err != nil {
				return nil, 0, 0, err
			}
			for _, reg := range regs[from:] {
				top = math.Max(top, reg)
			}
			out = append(out, list...)
			out = append(out, also...)
		}
		return out, top, count, nil
	}

	// The initial working set: the worst configurations of greedy, as
	// many per subset as keep the first LP near a million nonzeros (a row
	// has about two per point of the subset's difference pmf), between 8
	// and the batch: rows of fine-step normal noise reach tens of
	// thousands of cells each.
	init, initTop, _, err := worst(f.Tables, -1, nil, 0, func(q tables.Set) int {
		return min(batch, max(8, 500000/max(f.differences(q).Len(), 1)))
	})
	if err != nil {
		return nil, err
	}
	add(init)
	if core := f.coreConfigs(coreNonzeros); len(core) > 0 {
		list := make([]scored, len(core))
		for i, v := range core {
			list[i] = scored{v: v}
		}
		add(list)
	}
	f.addCellRowsFrom(1, nil)
	cols := f.Problem.NumCols()
	// The model starts with the initial regret rows and the cell rows.
	model, err := newModel(f.Problem)
	if err != nil {
		return nil, err
	}
	defer model.Close()
	if pm, ok := model.(interface{ Prefer(func(col int) float64) }); ok {
		// Where nothing decides between a cell's channels, prefer the
		// highest reading plus its offset (lowest score best), as a cell
		// without columns does.
		pm.Prefer(func(col int) float64 {
			v := f.Vars[col-1]
			t := f.Tables.Table(v.Group)
			return -float64(tables.OffsetScore(t.Cells[v.Cell].Diff[v.Channel], f.Tables.Half, t.Members[v.Channel]))
		})
	}
	if pm, ok := model.(interface{ Parts(func(col int) int) }); ok {
		// A part per table and channel of highest reading.
		pm.Parts(func(col int) int {
			v := f.Vars[col-1]
			t := f.Tables.Table(v.Group)
			c := &t.Cells[v.Cell]
			top := -1
			for k, ch := range t.Members {
				if c.Alive.Has(ch) && (top < 0 || c.Diff[k] > c.Diff[top]) {
					top = k
				}
			}
			return int(v.Group)<<5 | top
		})
	}
	pending = &lp.Problem{}

	// reached marks the columns of the cells that the prior of the last
	// exact round reaches (see Formulation.reachedColumns).
	var reached []bool
	// shapeCosts returns the shaped LP's column costs: mu, or far in the
	// cells that reached does not mark, times one less the probability
	// that the rule of snap gives the column's choice in its cell (see
	// eachSnapped for cells that snap has not seen). Cells of one orbit
	// share columns: the cost is that of the column's own cell, summed
	// over the members that share the column.
	shapeCosts := func(snap [][]float64, mu, far float64) []float64 {
		c := make([]float64, f.Problem.NumCols())
		f.eachSnapped(snap, func(t *tables.Table, ci int, p []float64) {
			cols := f.cols[t.Group][ci*len(t.Members):]
			for k := range t.Members {
				if col := int(cols[k]); col > 0 && int(f.Vars[col-1].Cell) == ci {
					w := far
					if col < len(reached) && reached[col] {
						w = mu
					}
					// A mixture's probability can pass 1 by a
					// rounding; lp/dw refuses negative costs.
					c[col] += w * max(0, 1-p[k])
				}
			}
		})
		return c
	}
	shaper, _ := model.(Shaper)
	// shaped says the next round is shaped; lb is the highest Bayes
	// risk of a round's prior.
	shaped, lb := false, 0.0
	// gapBefore is the best rule's gap to lb after the round before.
	gapBefore := math.Inf(1)

	res := &CGResult{F: f}
	// best is the rule with the least worst case found so far: the
	// highest reading at first (the tables without cells), then mixtures
	// of it with the rules of the rounds. Each round's rule is optimal on
	// the working set but can be far from it elsewhere, each in its own
	// places; the best mixture of two rules is found from their regrets at
	// every configuration, regrets being linear in the probabilities.
	best := struct {
		snap  [][]float64
		regs  []float64
		worst float64
	}{make([][]float64, len(f.Tables.Tables)), append([]float64(nil), regs...), initTop}
	// finish installs the best rule and returns the result.
	finish := func(converged bool) (*CGResult, error) {
		f.restore(best.snap)
		res.WorstCase, res.Converged = best.worst, converged
		if res.Near != nil {
			fast.SortConfigs(n, res.Near)
		}
		return res, nil
	}
	// setShape sets the model's program: exact, or shaped around the best
	// rule (see Shaper).
	setShape := func(shaped bool) error {
		if shaper == nil {
			return nil
		}
		var c []float64
		var t float64
		if shaped {
			rel := relGap(best.worst, lb)
			t = min(shapeTol, max(1e-11, rel/10))
			mu, far := shapeBias*min(1, rel/shapeRel), shapeBias
			if rel < shapeAll {
				far = mu
			}
			c = shapeCosts(best.snap, mu, far)
		}
		if err := shaper.SetCosts(c); err != nil {
			return err
		}
		shaper.SetTolerance(t)
		return nil
	}
	// failed returns what a failed solve of a round ends in: the best
	// rule at the time limit, or an error.
	failed := func(round int, err error) (*CGResult, error) {
		var se *lp.StatusError
		stopped := errors.Is(err, context.DeadlineExceeded) || (errors.As(err, &se) && se.Status == lp.TimeLimit)
		if ctx.Err() == nil && !opt.Deadline.IsZero() && stopped {
			if res.Solution != nil {
				return finish(false)
			}
			return nil, fmt.Errorf("constraint generation: the time limit passed before the first LP solve ended (%d configurations, %d columns, %d nonzeros)",
				f.NumConfigs(), f.Problem.NumCols(), f.Problem.NumNonzeros())
		}
		return nil, fmt.Errorf("constraint generation, round %d (%d configurations): %w", round, f.NumConfigs(), err)
	}
	// bound takes the lower bound of a solution: the Bayes risk of its
	// prior, exact or not (a shaped round's prior is near the least
	// favourable one too); the solution whose prior gives the highest is
	// the certificate's. The Objective of a solution that is not exact
	// (shaped, or cut short) is not the working set's optimum; when it is
	// the certificate's, it becomes that bound. An exact solution's prior
	// also marks the reached cells.
	bound := func(sol *lp.Solution, exact bool) {
		prior := f.Prior(sol.RowDual)
		if exact {
			reached = f.reachedColumns(prior)
		}
		if pv := f.PriorValue(prior); res.Solution == nil || pv > lb {
			res.Solution, lb = sol, pv
			if !exact {
				sol.Objective = pv
			}
		}
	}
	// partial takes the lower bound of the prior that an interrupted
	// solve returns with its error (lp/dw does: the best prior so far),
	// as the certificate's when it is the highest. A time limit during a
	// round's solve then keeps the bound the solve had reached.
	partial := func(sol *lp.Solution) {
		if sol == nil || sol.RowDual == nil || res.Solution == nil {
			return
		}
		bound(sol, false)
	}
	split := opt.Split
	if split == 0 {
		split = splitConfigs
	}
	// exactConfigs and exactTol are the size of the working set at the
	// last exact solve of a split round and the tolerance of that solve:
	// when the set has not grown since and the solve was as tight as the
	// next would be, its bound stands, and the round is shaped alone.
	exactConfigs, exactTol := -1, 0.0
	// boundReached reports whether the bound has reached the best rule's
	// worst case, within the tolerance.
	boundReached := func() bool { return best.worst <= lb*(1+tol)+1e-12 }
	for round := 1; ; round++ {
		splits := !shaped && shaper != nil && split >= 0 && len(best.regs) >= split
		stol := splitTol(best.worst, lb)
		if splits && f.NumConfigs() == exactConfigs && exactTol <= stol {
			splits, shaped = false, true
		}
		if splits {
			exactConfigs, exactTol = f.NumConfigs(), stol
			// With many configurations an exact round solves the
			// working set's LP exactly, for the bound and the cells its
			// prior reaches, then again shaped around the best rule
			// (in the first round the offset rule, or the highest
			// reading), and goes on with the shaped rule (see
			// splitConfigs).
			if err := setShape(false); err != nil {
				return nil, err
			}
			shaper.SetTolerance(stol)
			sol, err := solveBy(ctx, model, opt.Deadline)
			if err != nil {
				partial(sol)
				return failed(round, err)
			}
			bound(sol, true)
			if boundReached() {
				return finish(true)
			}
			shaped = true
		}
		if err := setShape(shaped); err != nil {
			return nil, err
		}
		sol, err := solveBy(ctx, model, opt.Deadline)
		if err != nil {
			partial(sol)
			return failed(round, err)
		}
		f.Apply(sol.X)
		// The LP value: with costs, the largest row of the working set
		// (t), not the objective.
		value := sol.Objective
		if shaped {
			value = sol.X[0]
		}
		threshold := value*(1+tol) + 1e-12
		// Add the configurations where this round's rule is most
		// violated and, half as many, where the best rule so far is:
		// the round's rule is often bad where the best rule is not
		// and good where it is not, and the best rule's worst case
		// is the upper bound. (Four channels with 15-point pmfs: a
		// certified gap of 0.065 steps after five rounds instead of
		// 0.14, the LP value rising every round instead of stalling
		// after the third; three channels with 15-point pmfs: 4
		// rounds instead of 14.)
		lam := 0.0
		if best.worst-value > inOutGap*value {
			lam = inOutWeight
		}
		nbr, nbrList = nil, nil
		if lam > 0 {
			nbr = neighbours(f, sol.RowDual, canon)
		}
		// The bound first, so that the scan keeps the configurations
		// near it (CGResult.Near): the final worst case is at least the
		// bound, which never falls.
		bound(sol, !shaped)
		nearCut, nearV, nearAt, nearFull = lb*(1-2*NearRel), nearV[:0], nearAt[:0], false
		viol, top, count, err := worst(f.Tables, threshold, best.regs, lam, func(tables.Set) int { return batch })
		if err != nil {
			return nil, err
		}
		viol = append(viol, nbrList...)
		res.Rounds = round
		if len(regs) != len(best.regs) {
			return nil, fmt.Errorf("constraint generation: the evaluator reported %d configurations, then %d", len(best.regs), len(regs))
		}
		// The round's rule is optimal when no configuration outside the
		// working set is above the LP value and none inside it by more
		// than the LP solver's tolerances (the LP's rows hold the
		// working set's regrets up to them; a hundredfold margin).
		optimal := !shaped && count == 0 && top <= value*(1+100*tol)+1e-12
		if optimal {
			best.snap, best.worst = f.snapshot(), top
			copy(best.regs, regs)
		} else if theta, w := bestMix(regs, best.regs, value); w < best.worst {
			// The worst case of the mixture is the largest of its
			// regrets: bestMix's can be the LP value, higher, when every
			// regret is below it.
			best.snap, best.worst = f.mix(best.snap, theta), 0
			for i, r := range regs {
				best.regs[i] = theta*r + (1-theta)*best.regs[i]
				best.worst = max(best.worst, best.regs[i])
			}
		}
		// The configurations near the best rule's worst case, from those
		// the scan kept near the bound.
		res.Near = nil
		if nearCut > 0 && !nearFull {
			res.Near = [][]int{}
			for i, at := range nearAt {
				if best.regs[at] >= (1-NearRel)*best.worst {
					res.Near = append(res.Near, nearV[i])
				}
			}
		}
		if opt.Progress != nil {
			opt.Progress(Progress{Round: round, Configs: f.NumConfigs(), LPValue: value, Shaped: shaped,
				WorstCase: top, Best: best.worst, Violations: count, Elapsed: time.Since(start)})
		}
		if optimal || boundReached() {
			return finish(true)
		}
		if len(viol) == 0 && !shaped {
			// Every violated configuration is in the working set: the
			// LP's solution breaks its own rows beyond the tolerances,
			// and another round would add nothing. Ship the best rule,
			// not converged; its certificate says how far it is. (After
			// a shaped round the next, exact, round goes on.)
			return finish(false)
		}
		if round >= maxRounds || (!opt.Deadline.IsZero() && time.Now().After(opt.Deadline)) {
			return finish(false)
		}
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		// After a shaped round without violated configurations an
		// exact one: its value is the working set's optimum, a lower
		// bound. So too when the gap, under shapeRel, shrank by less
		// than a quarter in a shaped round: the bound may be what holds
		// it (the shaped rounds' cost and tolerance follow the gap, and
		// a bound below the optimum keeps them from shrinking). (Five
		// channels with 5-point pmfs, 10 minutes: a certified gap of
		// 1.2e-5 steps instead of 3.2e-5, the exact round after round 17
		// raising the bound from 0.635499 to 0.635530; three channels
		// of normal noise: 16 rounds instead of 15, four channels
		// unchanged.)
		gap := best.worst - lb
		stalled := shaped && gap < shapeRel*lb && gap > 0.75*gapBefore
		gapBefore = gap
		shaped = shaper != nil && count > 0 && !stalled
		add(viol)
		if p := f.Problem; p.NumCols() > cols {
			if err := model.AddColumns(p.ColLo[cols:], p.ColUp[cols:], p.Obj[cols:]); err != nil {
				return nil, err
			}
		}
		f.addCellRowsFrom(cols, pending)
		cols = f.Problem.NumCols()
		if err := model.AddRows(pending); err != nil {
			return nil, err
		}
		pending = &lp.Problem{}
	}
}

// The core of the initial working set (coreConfigs): every configuration
// whose values lie within one less than the smallest noise spread of each
// other, when their rows hold at most about coreNonzeros nonzeros. With
// narrow noise the least favourable prior weighs such tight
// configurations, where the channels are hardest to tell apart, and with
// them the first round's LP value is close to the optimum, a lower bound
// right from the start. (Five channels with 5-point pmfs: the 2,096
// configurations within 3 steps give 0.63550 in the first round, against
// an optimum of 0.63553; without them 0.540, and priors of the shaped
// rounds no better than 0.629 after 240 s. With wide noise the
// configurations within a few steps are not enough: four channels with
// 15-point pmfs, the 641 within 3 steps, gave the same first LP value and
// 20 s more.)
const coreNonzeros = 1e7

// coreConfigs returns every configuration, of every subset, whose values
// span at most w-1 steps, w the smallest noise spread, when their rows
// hold about budget nonzeros at most (two per point of the subset's
// difference pmf), and nil otherwise.
func (f *Formulation) coreConfigs(budget float64) [][]int {
	l := f.Layout
	n := l.N()
	w := l.Hi[0] - l.Lo[0]
	for i := range l.Lo {
		w = min(w, l.Hi[i]-l.Lo[i])
	}
	s := w - 1
	if s < 1 {
		return nil
	}
	var core [][]int
	nz := 0.0
	for _, q := range tables.Subsets(n) {
		per := 2 * float64(f.differences(q).Len())
		tables.Configurations(n, q, s, func(v []int) bool {
			for _, x := range v {
				if x != tables.Far && x > s {
					return true
				}
			}
			core = append(core, slices.Clone(v))
			nz += per
			return nz <= budget
		})
		if nz > budget {
			return nil
		}
	}
	return core
}

// bestMix returns the theta in [0, 1] that minimises the worst case
// max_v theta*a[v] + (1-theta)*b[v] of the mixture of two rules with
// regrets a and b, and that worst case. lower is a lower bound on the
// least worst case of any rule: configurations where both rules are at
// most lower cannot decide the mixture's worst case.
//
// (Tried and not kept: the best mixture of all the rounds' rules, not just
// of two, from a small LP over each rule's regrets above 0.98 of the
// bound, with row generation over the configurations. Five channels with
// 5-point pmfs: best rules of 0.7706, 0.7465, 0.7303 and 0.6688 after
// rounds 2, 3, 4 and 8, against 0.7719, 0.7465, 0.7314 and 0.6690 with two.
// Each round's rule lies near the best rule before it, and several add
// little to two.)
func bestMix(a, b []float64, lower float64) (theta, worst float64) {
	var ca, cb []float64
	for v := range a {
		if a[v] > lower || b[v] > lower {
			ca = append(ca, a[v])
			cb = append(cb, b[v])
		}
	}
	g := func(th float64) float64 {
		m := lower
		for v := range ca {
			m = math.Max(m, th*ca[v]+(1-th)*cb[v])
		}
		return m
	}
	// g is convex: golden-section search, then the better of its result
	// and the ends.
	const phi = 0.6180339887498949
	lo, hi := 0.0, 1.0
	x1, x2 := hi-phi*(hi-lo), lo+phi*(hi-lo)
	g1, g2 := g(x1), g(x2)
	for hi-lo > 1e-12 {
		if g1 <= g2 {
			hi, x2, g2 = x2, x1, g1
			x1 = hi - phi*(hi-lo)
			g1 = g(x1)
		} else {
			lo, x1, g1 = x1, x2, g2
			x2 = lo + phi*(hi-lo)
			g2 = g(x2)
		}
	}
	theta, worst = x1, g1
	if g2 < worst {
		theta, worst = x2, g2
	}
	for _, th := range []float64{0, 1} {
		if w := g(th); w <= worst {
			theta, worst = th, w
		}
	}
	return theta, worst
}

// neighbours returns the keys of the canonical configurations one step
// away, in one channel of their subset, from the configurations that the
// prior in dual weighs. While the gap is wide (see inOutWeight) the
// violated ones are added besides the batch: the LP's value is held by a
// few configurations (five channels with 5-point pmfs: about 20 of
// 2,000), and those next to them share most of their cells, so that they
// are the ones most likely to raise it. (Five channels: LP value 0.636
// and a certified gap of 0.096 steps after 238 s instead of 0.615 and
// 0.121; four channels with 15-point pmfs: 7 rounds and 79 s instead of
// 10 and about 105 s. On two random four-channel models it cost time:
// 51 s instead of 30 s, 64 s instead of 54 s.)
func neighbours(f *Formulation, dual []float64, canon func([]int) []int) map[configKey]bool {
	out := make(map[configKey]bool)
	u := make([]int, f.Layout.N())
	for k, x := range f.Prior(dual) {
		if x == 0 {
			continue
		}
		v := f.Config(k)
		for i := range v {
			if v[i] == tables.Far {
				continue
			}
			for _, d := range []int{-1, 1} {
				copy(u, v)
				u[i] += d
				// Back to the lowest value 0, as the evaluator
				// reports configurations. A neighbour with a gap over
				// D is kept too: the evaluator never reports it, so it
				// never matches.
				lo := math.MaxInt
				for _, x := range u {
					if x != tables.Far {
						lo = min(lo, x)
					}
				}
				for j, x := range u {
					if x != tables.Far {
						u[j] = x - lo
					}
				}
				out[keyOf(canon(u))] = true
			}
		}
	}
	return out
}

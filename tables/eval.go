package tables

import (
	"runtime"
	"sync"
)

// Worst is the worst case of a rule: its largest regret over the
// configurations evaluated, and the configuration where it is reached.
type Worst struct {
	// Regret is the worst-case regret in steps.
	Regret float64
	// Values is the configuration reaching it: true values in steps with
	// minimum 0 over Subset, Far for channels far below the others.
	Values []int
	// Subset holds the channels of the configuration.
	Subset Set
	// Configurations is the number of configurations evaluated.
	Configurations int
}

// Regret returns the expected regret, in steps, of rule at true values v
// (Far for channels far below): max v - sum_i v_i P[rule picks i].
func (l *Layout) Regret(rule Rule, v []int) float64 {
	n := l.N()
	q := SubsetOf(v)
	top := Far
	for _, x := range v {
		top = max(top, x)
	}
	if q.Len() < 2 {
		return 0
	}
	r := make([]int, n)
	p := make([]float64, n)
	var sum float64
	l.Outcomes(q, func(a []int, prob float64) {
		for i := range r {
			r[i] = v[i] + a[i]
		}
		rule.Probs(r, p)
		var s float64
		for i := range p {
			if p[i] != 0 {
				s += p[i] * float64(top-v[i])
			}
		}
		sum += prob * s
	})
	return sum
}

// EachConfiguration visits every configuration of every subset of at
// least two of the n channels whose sorted value gaps are at most d steps,
// spread over runtime.GOMAXPROCS(0) goroutines. Each goroutine gets its own
// visit function from newVisit, so it can keep state without locking; visit
// receives the configuration's position in enumeration order (Subsets,
// then Configurations), its subset, and the values, which it may keep.
// EachConfiguration returns when every visit has returned, with the number
// of configurations.
func EachConfiguration(n, d int, newVisit func() func(seq int, q Set, v []int)) int {
	type job struct {
		seq int
		q   Set
		v   []int
	}
	workers := runtime.GOMAXPROCS(0)
	jobs := make(chan []job, workers)
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		visit := newVisit()
		wg.Add(1)
		go func() {
			defer wg.Done()
			for batch := range jobs {
				for _, j := range batch {
					visit(j.seq, j.q, j.v)
				}
			}
		}()
	}
	count := 0
	var batch []job
	for _, q := range Subsets(n) {
		Configurations(n, q, d, func(v []int) bool {
			batch = append(batch, job{count, q, append([]int(nil), v...)})
			count++
			if len(batch) == 64 {
				jobs <- batch
				batch = nil
			}
			return true
		})
	}
	if len(batch) > 0 {
		jobs <- batch
	}
	close(jobs)
	wg.Wait()
	return count
}

// WorstCase returns the worst-case regret of rule over every configuration
// of every subset of at least two channels whose sorted consecutive value
// gaps are at most d steps. For the table rules of this package d = l.D
// gives the exact worst case (design notes, step 4); a rule that shifts
// readings needs d widened by the largest shift. Ties keep the first
// configuration in enumeration order, so the result is deterministic.
func (l *Layout) WorstCase(rule Rule, d int) Worst {
	type res struct {
		seq    int
		regret float64
		v      []int
	}
	var bests []*res
	count := EachConfiguration(l.N(), d, func() func(int, Set, []int) {
		best := &res{seq: -1}
		bests = append(bests, best)
		return func(seq int, _ Set, v []int) {
			reg := l.Regret(rule, v)
			if best.seq < 0 || reg > best.regret || (reg == best.regret && seq < best.seq) {
				*best = res{seq, reg, v}
			}
		}
	})
	best := res{seq: -1}
	for _, r := range bests {
		if r.seq < 0 {
			continue
		}
		if best.seq < 0 || r.regret > best.regret || (r.regret == best.regret && r.seq < best.seq) {
			best = *r
		}
	}
	return Worst{Regret: best.regret, Values: best.v, Subset: SubsetOf(best.v), Configurations: count}
}

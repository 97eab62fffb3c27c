package clp

/*
#include <stdlib.h>
#include <coin/Clp_C_Interface.h>
*/
import "C"

import (
	"context"
	"errors"
	"fmt"
	"math"
	"runtime"
	"time"
	"unsafe"

	"github.com/pickwise/pickwise/lp"
)

// Model is a linear program loaded into CLP. It keeps CLP's basis between
// solves, so rows appended with AddRows are handled by a warm-started
// simplex. A Model must be freed with Close; a Model that becomes
// unreachable without Close is freed by the garbage collector, but CLP's
// memory is invisible to the Go runtime, so relying on that can exhaust
// memory. A Model is not safe for concurrent use.
type Model struct {
	// These mean the same as in Solver. They are read at each Solve;
	// Algorithm applies to the first solve only.
	LogLevel                       int
	MaxSeconds                     float64
	Algorithm                      Algorithm
	PrimalTolerance, DualTolerance float64
	// Resolve is the simplex method of the solves after the first, from
	// the basis the previous solve left: Primal (the zero value) or
	// Dual. The dual simplex is the textbook choice after adding rows,
	// as the old basis stays dual feasible, but on minimax-regret LPs in
	// constraint generation (three channels with 15-point pmfs, rounds
	// of 32 rows per subset, tolerance 1e-9) it took 5 to 15 s per round
	// where the primal simplex took 0.2 to 3 s: those LPs are highly
	// degenerate and the dual simplex stalls on them.
	Resolve Algorithm

	ptr     unsafe.Pointer
	cleanup runtime.Cleanup
	solved  bool // CLP holds a basis from an earlier solve
	rows    int
	cols    int
	// used[j] reports whether column j has a nonzero entry in some row;
	// see emptyRays.
	used []bool
	// empty lists the rows without nonzero entries; see badEmptyRow.
	empty []int
}

// ErrClosed is returned by the methods of a Model after Close.
var ErrClosed = errors.New("clp: model is closed")

// NewModel loads p into a new CLP model. p is copied; later changes to p do
// not affect the model.
func NewModel(p *lp.Problem) (*Model, error) {
	if err := p.Validate(); err != nil {
		return nil, fmt.Errorf("clp: %w", err)
	}
	if p.NumNonzeros() > math.MaxInt32 || p.NumCols() > math.MaxInt32-1 || p.NumRows() > math.MaxInt32-1 {
		return nil, fmt.Errorf("clp: problem too large for 32-bit indices: %d columns, %d rows, %d nonzeros",
			p.NumCols(), p.NumRows(), p.NumNonzeros())
	}
	m := &Model{ptr: C.Clp_newModel()}
	if m.ptr == nil {
		return nil, errors.New("clp: cannot allocate a model")
	}
	m.cleanup = runtime.AddCleanup(m, func(ptr unsafe.Pointer) { C.Clp_deleteModel(ptr) }, m.ptr)
	C.Clp_setLogLevel(m.ptr, 0)

	// Load the columns with an empty matrix, then append the rows straight
	// from the CSR arrays: only the row starts need converting, and CLP
	// makes its own column-major copy of the matrix.
	n := p.NumCols()
	zeros := make([]C.CoinBigIndex, n+1)
	var dummyIndex C.int
	var dummyValue C.double
	C.Clp_loadProblem(m.ptr, C.int(n), 0, &zeros[0], &dummyIndex, &dummyValue,
		dptr(p.ColLo), dptr(p.ColUp), dptr(p.Obj), nil, nil)
	m.cols = n
	m.used = make([]bool, n)
	if err := m.addRows(p.RowStart, p.Index, p.Value, p.RowLo, p.RowUp); err != nil {
		m.Close()
		return nil, err
	}
	runtime.KeepAlive(p)
	return m, nil
}

// Close frees the CLP model. It is safe to call more than once.
func (m *Model) Close() {
	if m.ptr == nil {
		return
	}
	m.cleanup.Stop()
	C.Clp_deleteModel(m.ptr)
	m.ptr = nil
}

// NumRows returns the number of rows in the model.
func (m *Model) NumRows() int { return m.rows }

// NumCols returns the number of columns in the model.
func (m *Model) NumCols() int { return m.cols }

// Rows is a batch of rows to append to a Model, in the compressed sparse
// row form of lp.Problem: row k is
//
//	Lo[k] <= sum of Value[e]*x[Index[e]] over Start[k] <= e < Start[k+1] <= Up[k].
//
// The zero value is an empty batch; use Add to build it.
type Rows struct {
	Start  []int     // len = rows+1, or 0 when empty
	Index  []int32   // column index of each entry
	Value  []float64 // coefficient of each entry
	Lo, Up []float64 // row bounds
}

// Add appends the row lo <= sum_k val[k]*x[idx[k]] <= up to the batch.
func (r *Rows) Add(idx []int, val []float64, lo, up float64) {
	if len(r.Start) == 0 {
		r.Start = append(r.Start, 0)
	}
	for k, j := range idx {
		r.Index = append(r.Index, int32(j))
		r.Value = append(r.Value, val[k])
	}
	r.Start = append(r.Start, len(r.Index))
	r.Lo = append(r.Lo, lo)
	r.Up = append(r.Up, up)
}

// RowsOf returns the rows of p as a batch, sharing p's arrays (its
// columns are ignored).
func RowsOf(p *lp.Problem) *Rows {
	return &Rows{Start: p.RowStart, Index: p.Index, Value: p.Value, Lo: p.RowLo, Up: p.RowUp}
}

// Len returns the number of rows in the batch.
func (r *Rows) Len() int { return len(r.Lo) }

// AddRows appends the rows of r to the model. The next Solve starts from
// the current basis with the new rows' slacks basic (see Model.Resolve).
func (m *Model) AddRows(r *Rows) error {
	if m.ptr == nil {
		return ErrClosed
	}
	if err := checkRows(m.cols, r); err != nil {
		return fmt.Errorf("clp: adding rows: %w", err)
	}
	if err := m.addRows(r.Start, r.Index, r.Value, r.Lo, r.Up); err != nil {
		return fmt.Errorf("clp: adding rows: %w", err)
	}
	return nil
}

// AddColumns appends len(lo) columns in no row, with bounds lo[k] <= x <=
// up[k] and costs obj[k]; rows added later may use them. The next Solve
// starts from the current basis with the new columns nonbasic.
func (m *Model) AddColumns(lo, up, obj []float64) error {
	if m.ptr == nil {
		return ErrClosed
	}
	k := len(lo)
	if len(up) != k || len(obj) != k {
		return fmt.Errorf("clp: adding columns: %d lower bounds, %d upper bounds, %d costs", k, len(up), len(obj))
	}
	for j := range k {
		if math.IsNaN(lo[j]) || math.IsNaN(up[j]) || lo[j] > up[j] || math.IsInf(lo[j], 1) || math.IsInf(up[j], -1) {
			return fmt.Errorf("clp: adding columns: column %d has bounds [%g, %g]", m.cols+j, lo[j], up[j])
		}
		if math.IsNaN(obj[j]) || math.IsInf(obj[j], 0) {
			return fmt.Errorf("clp: adding columns: column %d has cost %g", m.cols+j, obj[j])
		}
	}
	if k == 0 {
		return nil
	}
	if m.cols+k > math.MaxInt32-1 {
		return fmt.Errorf("clp: adding columns: model would have %d columns, too many for 32-bit indices", m.cols+k)
	}
	starts := make([]C.CoinBigIndex, k+1)
	var dummyIndex C.int
	var dummyValue C.double
	C.Clp_addColumns(m.ptr, C.int(k), dptr(lo), dptr(up), dptr(obj), &starts[0], &dummyIndex, &dummyValue)
	m.cols += k
	m.used = append(m.used, make([]bool, k)...)
	runtime.KeepAlive(m)
	return nil
}

// addRows passes a checked CSR batch to CLP. Index, value and bound slices
// are passed as they are (int32 and float64 have C's layout and the slices
// hold no Go pointers); only the starts are converted.
func (m *Model) addRows(start []int, index []int32, value []float64, lo, up []float64) error {
	k := len(lo)
	if k == 0 {
		return nil
	}
	if m.rows+k > math.MaxInt32-1 {
		return fmt.Errorf("model would have %d rows, too many for 32-bit indices", m.rows+k)
	}
	if start[k]-start[0] > math.MaxInt32 {
		return fmt.Errorf("%d nonzeros in one batch, too many for 32-bit indices", start[k]-start[0])
	}
	base := start[0]
	cs := make([]C.CoinBigIndex, k+1)
	for i := range cs {
		cs[i] = C.CoinBigIndex(start[i] - base)
	}
	var ip *C.int
	var vp *C.double
	var dummyIndex C.int
	var dummyValue C.double
	if start[k] > base {
		ip = (*C.int)(unsafe.Pointer(&index[base]))
		vp = (*C.double)(unsafe.Pointer(&value[base]))
	} else {
		ip, vp = &dummyIndex, &dummyValue
	}
	C.Clp_addRows(m.ptr, C.int(k), dptr(lo), dptr(up), &cs[0], ip, vp)
	for i := range k {
		nz := false
		for e := start[i]; e < start[i+1]; e++ {
			if value[e] != 0 {
				m.used[index[e]] = true
				nz = true
			}
		}
		if !nz {
			m.empty = append(m.empty, m.rows+i)
		}
	}
	m.rows += k
	runtime.KeepAlive(m)
	return nil
}

// Solve solves the model. The first call uses m.Algorithm; later calls
// re-solve with m.Resolve from the basis left by the previous call.
// A solve that does not end optimal returns a *lp.StatusError; a context
// that is done before the solve, or that ends during it, returns an error
// wrapping the context's error.
func (m *Model) Solve(ctx context.Context) (*lp.Solution, error) {
	if m.ptr == nil {
		return nil, ErrClosed
	}
	if err := ctx.Err(); err != nil {
		return nil, fmt.Errorf("clp: %w", err)
	}
	secs := m.MaxSeconds
	if d, ok := ctx.Deadline(); ok {
		rem := time.Until(d).Seconds()
		if rem <= 0 {
			return nil, fmt.Errorf("clp: %w", context.DeadlineExceeded)
		}
		if secs <= 0 || rem < secs {
			secs = rem
		}
	}
	C.Clp_setLogLevel(m.ptr, C.int(m.LogLevel))
	ptol, dtol := m.PrimalTolerance, m.DualTolerance
	if ptol <= 0 {
		ptol = DefaultTolerance
	}
	if dtol <= 0 {
		dtol = DefaultTolerance
	}
	C.Clp_setPrimalTolerance(m.ptr, C.double(ptol))
	C.Clp_setDualTolerance(m.ptr, C.double(dtol))
	if secs > 0 {
		C.Clp_setMaximumSeconds(m.ptr, C.double(secs))
	} else {
		C.Clp_setMaximumSeconds(m.ptr, -1)
	}

	alg := m.Algorithm
	if m.solved {
		alg = m.Resolve
		if alg != Primal && alg != Dual {
			return nil, fmt.Errorf("clp: re-solve algorithm must be Primal or Dual, not %v", alg)
		}
	}
	if alg < Primal || alg > DualPresolve {
		return nil, fmt.Errorf("clp: unknown algorithm %d", int(alg))
	}
	defer runtime.KeepAlive(m)
	start := time.Now()
	// A column in no row whose cost improves without limit makes the
	// problem unbounded if the rest is feasible. CLP 1.17 gets such
	// problems wrong (it scales empty columns by about 1e20 and then
	// reports primal infeasible, or optimal with huge dual
	// infeasibilities), so these columns are fixed at a finite value for
	// the solve and the verdict is drawn here.
	ray := m.emptyRays()
	if len(ray) > 0 {
		restore := m.fixColumns(ray)
		defer restore()
	}
	switch alg {
	case Dual:
		C.Clp_dual(m.ptr, 0)
	case Primal:
		C.Clp_primal(m.ptr, 0)
	case Automatic:
		C.Clp_initialSolve(m.ptr)
	case DualPresolve:
		C.Clp_initialDualSolve(m.ptr)
	}
	m.solved = true
	iterations := int(C.Clp_numberIterations(m.ptr))
	lastPrimal := alg == Primal
	// CLP's time limit counts the process's CPU time, which the
	// program's other threads (the garbage collector of a large heap)
	// spend too: a solve can stop well before the wall-clock limit (a
	// master of lp/dw stopped after 7,023 iterations, seconds before its
	// deadline). Continue from the basis reached until the wall-clock
	// limit has passed.
	for tries := 0; secs > 0 && C.Clp_status(m.ptr) == 3 && tries < 1000; tries++ {
		rem := secs - time.Since(start).Seconds()
		if rem <= 0 {
			break
		}
		// The other threads are still busy, most likely: allow
		// their share of CPU time, or this stops early again.
		C.Clp_setMaximumSeconds(m.ptr, C.double(rem*float64(runtime.GOMAXPROCS(0))))
		if lastPrimal {
			C.Clp_primal(m.ptr, 0)
		} else {
			C.Clp_dual(m.ptr, 0)
		}
		iterations += int(C.Clp_numberIterations(m.ptr))
	}
	if C.Clp_status(m.ptr) == 4 {
		// Stopped on errors: the other simplex method, from the basis
		// reached, often gets through. (The primal simplex stops so on
		// some infeasible problems that the dual simplex recognises.)
		if lastPrimal {
			C.Clp_dual(m.ptr, 0)
		} else {
			C.Clp_primal(m.ptr, 0)
		}
		lastPrimal = !lastPrimal
		iterations += int(C.Clp_numberIterations(m.ptr))
	}
	if C.Clp_status(m.ptr) == 1 && !lastPrimal {
		// The dual simplex (and the drivers built on it) can call an
		// unbounded problem with free columns primal infeasible after
		// 0 iterations (seen on random LPs, against GLPK). The primal
		// simplex from the final basis gives the verdict when it finds
		// the problem unbounded or solves it; when it fails instead (it
		// can stop on errors on problems that are infeasible), the
		// verdict stays infeasible.
		C.Clp_primal(m.ptr, 0)
		iterations += int(C.Clp_numberIterations(m.ptr))
		if st := C.Clp_status(m.ptr); st != 0 && st != 2 {
			C.Clp_setProblemStatus(m.ptr, 1)
			C.Clp_setSecondaryStatus(m.ptr, 0)
		}
	}
	if C.Clp_status(m.ptr) == 0 {
		// Neither clean-up below is bound by the time limit, which may
		// have run out just as the main solve ended.
		C.Clp_setMaximumSeconds(m.ptr, -1)
		if !lastPrimal {
			// Clean up with the primal simplex from the final basis.
			// The dual simplex works with artificial bounds of 1e10 on
			// columns with an infinite bound, and the solution it
			// leaves can carry their round-off: 6e-6 in the objective
			// on a 5-row problem with free columns, where this
			// clean-up recomputed the exact optimum in 0 iterations.
			C.Clp_primal(m.ptr, 0)
			iterations += int(C.Clp_numberIterations(m.ptr))
		}
		if sec := C.Clp_secondaryStatus(m.ptr); sec >= 2 && sec <= 4 {
			// Optimal only for the scaled problem: the unscaled one
			// has infeasibilities above the tolerances. This happens
			// on regret LPs, whose coefficients span many orders of
			// magnitude, and on random LPs it marked problems that are
			// in fact unbounded. The primal simplex without scaling
			// settles it.
			scaling := C.Clp_scalingFlag(m.ptr)
			C.Clp_scaling(m.ptr, 0)
			C.Clp_primal(m.ptr, 0)
			iterations += int(C.Clp_numberIterations(m.ptr))
			C.Clp_scaling(m.ptr, scaling)
		}
	}

	if err := ctx.Err(); err != nil {
		return nil, fmt.Errorf("clp: solve interrupted: %w", err)
	}
	if C.Clp_status(m.ptr) == 3 && secs > 0 && time.Since(start).Seconds() >= 0.9*secs {
		// Stopped by the time limit: CLP's secondary status does not
		// always say so.
		return nil, &lp.StatusError{Backend: "clp", Status: lp.TimeLimit,
			Detail: fmt.Sprintf("after %d iterations and %.3g s", iterations, time.Since(start).Seconds())}
	}
	if err := m.statusError(); err != nil {
		return nil, err
	}
	if len(ray) > 0 {
		return nil, &lp.StatusError{Backend: "clp", Status: lp.Unbounded,
			Detail: fmt.Sprintf("column %d is in no row and its cost improves without limit", ray[0])}
	}
	sol := &lp.Solution{
		Objective:  float64(C.Clp_objectiveValue(m.ptr)),
		X:          make([]float64, m.cols),
		RowDual:    make([]float64, m.rows),
		Iterations: iterations,
	}
	if m.cols > 0 {
		copy(sol.X, unsafe.Slice((*float64)(unsafe.Pointer(C.Clp_getColSolution(m.ptr))), m.cols))
	}
	if m.rows > 0 {
		copy(sol.RowDual, unsafe.Slice((*float64)(unsafe.Pointer(C.Clp_getRowPrice(m.ptr))), m.rows))
	}
	return sol, nil
}

// emptyRays returns the columns without nonzero entries whose cost
// improves without limit: negative cost and no upper bound, or positive
// cost and no lower bound.
func (m *Model) emptyRays() []int {
	if m.cols == 0 {
		return nil
	}
	obj := unsafe.Slice((*float64)(unsafe.Pointer(C.Clp_getObjCoefficients(m.ptr))), m.cols)
	lo := unsafe.Slice((*float64)(unsafe.Pointer(C.Clp_getColLower(m.ptr))), m.cols)
	up := unsafe.Slice((*float64)(unsafe.Pointer(C.Clp_getColUpper(m.ptr))), m.cols)
	var ray []int
	for j, u := range m.used {
		if !u && (obj[j] < 0 && up[j] >= 1e30 || obj[j] > 0 && lo[j] <= -1e30) {
			ray = append(ray, j)
		}
	}
	return ray
}

// fixColumns fixes the given columns at their finite bound, or at 0 if
// they have none, and returns a function that restores their bounds.
func (m *Model) fixColumns(cols []int) (restore func()) {
	lo := append([]float64(nil), unsafe.Slice((*float64)(unsafe.Pointer(C.Clp_getColLower(m.ptr))), m.cols)...)
	up := append([]float64(nil), unsafe.Slice((*float64)(unsafe.Pointer(C.Clp_getColUpper(m.ptr))), m.cols)...)
	savedLo, savedUp := append([]float64(nil), lo...), append([]float64(nil), up...)
	for _, j := range cols {
		v := 0.0
		switch {
		case lo[j] > -1e30:
			v = lo[j]
		case up[j] < 1e30:
			v = up[j]
		}
		lo[j], up[j] = v, v
	}
	C.Clp_chgColumnLower(m.ptr, dptr(lo))
	C.Clp_chgColumnUpper(m.ptr, dptr(up))
	return func() {
		C.Clp_chgColumnLower(m.ptr, dptr(savedLo))
		C.Clp_chgColumnUpper(m.ptr, dptr(savedUp))
	}
}

// badEmptyRow returns a row without entries whose bounds exclude 0, or -1.
func (m *Model) badEmptyRow() int {
	if len(m.empty) == 0 {
		return -1
	}
	lo := unsafe.Slice((*float64)(unsafe.Pointer(C.Clp_getRowLower(m.ptr))), m.rows)
	up := unsafe.Slice((*float64)(unsafe.Pointer(C.Clp_getRowUpper(m.ptr))), m.rows)
	for _, i := range m.empty {
		if lo[i] > 0 || up[i] < 0 {
			return i
		}
	}
	return -1
}

// statusError maps CLP's status and secondary status after a solve to nil
// (optimal) or a *lp.StatusError.
func (m *Model) statusError() error {
	st := int(C.Clp_status(m.ptr))
	sec := int(C.Clp_secondaryStatus(m.ptr))
	e := &lp.StatusError{Backend: "clp"}
	switch st {
	case 0:
		if sec == 0 {
			return nil
		}
		// Optimal for the scaled problem; accept the unscaled solution
		// only if its infeasibilities are within a loose tolerance.
		C.Clp_checkSolution(m.ptr)
		pinf := float64(C.Clp_sumPrimalInfeasibilities(m.ptr))
		dinf := float64(C.Clp_sumDualInfeasibilities(m.ptr))
		if pinf <= 1e-6 && dinf <= 1e-6 {
			return nil
		}
		e.Status = lp.NumericalTrouble
		e.Detail = fmt.Sprintf("optimal only when scaled (secondary status %d): unscaled primal infeasibility %g, dual infeasibility %g",
			sec, pinf, dinf)
	case 1:
		e.Status = lp.Infeasible
		if sec == 1 {
			e.Detail = "dual objective limit reached"
		}
	case 2:
		e.Status = lp.Unbounded
		e.Detail = "dual infeasible"
	case 3:
		if sec == 9 {
			e.Status = lp.TimeLimit
			e.Detail = fmt.Sprintf("after %d iterations", int(C.Clp_numberIterations(m.ptr)))
		} else {
			e.Status = lp.IterationLimit
			e.Detail = fmt.Sprintf("after %d iterations", int(C.Clp_numberIterations(m.ptr)))
		}
	case 4:
		e.Status = lp.NumericalTrouble
		if i := m.badEmptyRow(); sec == 6 && i >= 0 {
			// CLP's check of empty rows and columns gives up
			// without a verdict; an empty row whose bounds exclude 0
			// is a plain infeasibility.
			e.Status = lp.Infeasible
			e.Detail = fmt.Sprintf("row %d has no entries and its bounds exclude 0", i)
		} else if sec == 1 {
			e.Detail = "stopped on errors; probably primal infeasible"
		} else {
			e.Detail = fmt.Sprintf("stopped on errors (secondary status %d)", sec)
		}
	default:
		e.Status = lp.Unknown
		e.Detail = fmt.Sprintf("CLP status %d, secondary status %d", st, sec)
	}
	return e
}

// checkRows checks a batch of rows against a model with n columns.
func checkRows(n int, r *Rows) error {
	k := len(r.Lo)
	if len(r.Up) != k {
		return fmt.Errorf("%d row lower bounds but %d upper", k, len(r.Up))
	}
	if k == 0 {
		return nil
	}
	if len(r.Start) != k+1 {
		return fmt.Errorf("%d rows but %d row starts", k, len(r.Start))
	}
	if len(r.Index) != len(r.Value) {
		return fmt.Errorf("%d indices but %d values", len(r.Index), len(r.Value))
	}
	if r.Start[0] < 0 || r.Start[k] > len(r.Index) {
		return fmt.Errorf("row starts span [%d, %d], outside the %d entries", r.Start[0], r.Start[k], len(r.Index))
	}
	for i := 0; i < k; i++ {
		if r.Start[i] > r.Start[i+1] {
			return fmt.Errorf("row %d: start %d after next start %d", i, r.Start[i], r.Start[i+1])
		}
		if math.IsNaN(r.Lo[i]) || math.IsNaN(r.Up[i]) || r.Lo[i] > r.Up[i] {
			return fmt.Errorf("row %d: bad bounds [%g, %g]", i, r.Lo[i], r.Up[i])
		}
		for e := r.Start[i]; e < r.Start[i+1]; e++ {
			if j := r.Index[e]; j < 0 || int(j) >= n {
				return fmt.Errorf("row %d: column index %d out of range [0, %d)", i, j, n)
			}
			if v := r.Value[e]; math.IsNaN(v) || math.IsInf(v, 0) {
				return fmt.Errorf("row %d: coefficient %g", i, v)
			}
		}
	}
	return checkDuplicates(n, r.Start, r.Index)
}

// checkDuplicates reports a column index repeated within a row; CLP does
// not accept duplicate entries. (lp.Problem.Validate makes the same check
// for whole problems.)
func checkDuplicates(n int, start []int, index []int32) error {
	if len(start) < 2 {
		return nil
	}
	last := make([]int32, n) // 1 + the last row in which each column was seen
	for i := 0; i+1 < len(start); i++ {
		for e := start[i]; e < start[i+1]; e++ {
			j := index[e]
			if last[j] == int32(i+1) {
				return fmt.Errorf("row %d: column %d appears twice", i, j)
			}
			last[j] = int32(i + 1)
		}
	}
	return nil
}

// dptr returns a C pointer to the first element of s, or nil for an empty
// slice.
func dptr(s []float64) *C.double {
	if len(s) == 0 {
		return nil
	}
	return (*C.double)(unsafe.Pointer(&s[0]))
}

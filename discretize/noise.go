package discretize

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// Noise kinds as a model file names them.
const (
	KindExact    = "exact"
	KindPMF      = "pmf"
	KindNormal   = "normal"
	KindLaplace  = "laplace"
	KindLogistic = "logistic"
	KindUniform  = "uniform"
	KindStudent  = "student"
	KindSamples  = "samples"
)

// Kinds returns the noise kinds in a fixed order.
func Kinds() []string {
	return []string{KindExact, KindPMF, KindNormal, KindLaplace, KindLogistic, KindUniform, KindStudent, KindSamples}
}

// MaxDF is the largest number of degrees of freedom accepted for Student t
// noise. gonum's Student t quantile breaks down far above it, and there the
// distribution is a normal for every practical purpose.
const MaxDF = 1000

// MinSamples is the fewest measured errors accepted for Samples noise.
const MinSamples = 10

// Noise is the additive noise of one channel, in reading units, before it is
// put on the lattice.
type Noise interface {
	// Kind returns the noise kind, one of Kinds.
	Kind() string
	// Check validates the parameters for the given step and tail without
	// building the pmf; it fails exactly when Lattice would.
	Check(step, tail float64) error
	// Lattice returns the noise pmf on the lattice of the given step and
	// the probability mass cut from the tails and moved into the end bins.
	// The tail is used by continuous kinds only.
	Lattice(step, tail float64) (pmf PMF, cut float64, err error)
}

// ParamError reports an invalid noise parameter. Param names the parameter
// as a model file spells it ("sigma", "values", ...), or "step" or "tail".
type ParamError struct {
	Param string
	Msg   string
}

// Error implements the error interface.
func (e *ParamError) Error() string {
	if e.Param == "" {
		return e.Msg
	}
	return e.Param + ": " + e.Msg
}

// Exact is noise-free reading: offset 0 with probability 1.
type Exact struct{}

// Kind returns KindExact.
func (Exact) Kind() string { return KindExact }

// Check validates the step.
func (Exact) Check(step, tail float64) error { return checkStep(step) }

// Lattice returns the pmf with Lo = Hi = 0.
func (e Exact) Lattice(step, tail float64) (PMF, float64, error) {
	if err := e.Check(step, tail); err != nil {
		return PMF{}, 0, err
	}
	return PMF{Lo: 0, Num: []uint64{Denom}}, 0, nil
}

// Normal is normal noise with standard deviation Sigma and mean Mean.
type Normal struct {
	Sigma float64 // > 0
	Mean  float64 // bias
}

// Kind returns KindNormal.
func (Normal) Kind() string { return KindNormal }

func (n Normal) dist() distuv.Normal { return distuv.Normal{Mu: n.Mean, Sigma: n.Sigma} }

// Check validates the parameters and the size of the lattice pmf.
func (n Normal) Check(step, tail float64) error {
	if err := firstErr(checkPositive("sigma", n.Sigma), checkFinite("mean", n.Mean)); err != nil {
		return err
	}
	return spanSymmetric(n.dist(), n.Mean, step, tail, "sigma")
}

// Lattice rounds the distribution to the lattice as Round does.
func (n Normal) Lattice(step, tail float64) (PMF, float64, error) {
	if err := n.Check(step, tail); err != nil {
		return PMF{}, 0, err
	}
	return roundSymmetric(n.dist(), n.Mean, step, tail, "sigma")
}

// Laplace is Laplace (double exponential) noise with scale Scale and mean
// Mean; its standard deviation is Scale*sqrt(2).
type Laplace struct {
	Scale float64 // > 0
	Mean  float64 // bias
}

// Kind returns KindLaplace.
func (Laplace) Kind() string { return KindLaplace }

func (l Laplace) dist() laplace { return laplace{distuv.Laplace{Mu: l.Mean, Scale: l.Scale}} }

// Check validates the parameters and the size of the lattice pmf.
func (l Laplace) Check(step, tail float64) error {
	if err := firstErr(checkPositive("scale", l.Scale), checkFinite("mean", l.Mean)); err != nil {
		return err
	}
	return spanSymmetric(l.dist(), l.Mean, step, tail, "scale")
}

// Lattice rounds the distribution to the lattice as Round does.
func (l Laplace) Lattice(step, tail float64) (PMF, float64, error) {
	if err := l.Check(step, tail); err != nil {
		return PMF{}, 0, err
	}
	return roundSymmetric(l.dist(), l.Mean, step, tail, "scale")
}

// laplace is distuv.Laplace with a lower-tail quantile that keeps its
// precision for tiny probabilities: distuv computes log(1+2(p-1/2)), which
// rounds 2p to an absolute precision of 1e-16.
type laplace struct{ distuv.Laplace }

func (l laplace) Quantile(p float64) float64 {
	if p > 0 && p < 0.5 {
		return l.Mu + l.Scale*math.Log(2*p)
	}
	return l.Laplace.Quantile(p)
}

// Logistic is logistic noise with scale Scale and mean Mean; its standard
// deviation is Scale*pi/sqrt(3).
type Logistic struct {
	Scale float64 // > 0
	Mean  float64 // bias
}

// Kind returns KindLogistic.
func (Logistic) Kind() string { return KindLogistic }

func (l Logistic) dist() distuv.Logistic { return distuv.Logistic{Mu: l.Mean, S: l.Scale} }

// Check validates the parameters and the size of the lattice pmf.
func (l Logistic) Check(step, tail float64) error {
	if err := firstErr(checkPositive("scale", l.Scale), checkFinite("mean", l.Mean)); err != nil {
		return err
	}
	return spanSymmetric(l.dist(), l.Mean, step, tail, "scale")
}

// Lattice rounds the distribution to the lattice as Round does.
func (l Logistic) Lattice(step, tail float64) (PMF, float64, error) {
	if err := l.Check(step, tail); err != nil {
		return PMF{}, 0, err
	}
	return roundSymmetric(l.dist(), l.Mean, step, tail, "scale")
}

// Uniform is noise uniform on [Mean-HalfWidth, Mean+HalfWidth].
type Uniform struct {
	HalfWidth float64 // > 0
	Mean      float64 // bias
}

// Kind returns KindUniform.
func (Uniform) Kind() string { return KindUniform }

func (u Uniform) dist() distuv.Uniform {
	return distuv.Uniform{Min: u.Mean - u.HalfWidth, Max: u.Mean + u.HalfWidth}
}

// Check validates the parameters and the size of the lattice pmf.
func (u Uniform) Check(step, tail float64) error {
	if err := firstErr(checkPositive("half_width", u.HalfWidth), checkFinite("mean", u.Mean)); err != nil {
		return err
	}
	if d := u.dist(); !(d.Max > d.Min) {
		// Only when HalfWidth vanishes against Mean in float64.
		return &ParamError{Param: "half_width", Msg: fmt.Sprintf("%v is too small to resolve at mean %v", u.HalfWidth, u.Mean)}
	}
	return spanSymmetric(u.dist(), u.Mean, step, tail, "half_width")
}

// Lattice rounds the distribution to the lattice as Round does. Bins outside
// the support carry no mass and are trimmed.
func (u Uniform) Lattice(step, tail float64) (PMF, float64, error) {
	if err := u.Check(step, tail); err != nil {
		return PMF{}, 0, err
	}
	return roundSymmetric(u.dist(), u.Mean, step, tail, "half_width")
}

// Student is Student t noise: Mean + Scale*T with T a Student t variable of
// DF degrees of freedom.
type Student struct {
	Scale float64 // > 0
	DF    float64 // degrees of freedom, > 0 and at most MaxDF
	Mean  float64 // bias
}

// Kind returns KindStudent.
func (Student) Kind() string { return KindStudent }

func (s Student) dist() distuv.StudentsT {
	return distuv.StudentsT{Mu: s.Mean, Sigma: s.Scale, Nu: s.DF}
}

// Check validates the parameters and the size of the lattice pmf.
func (s Student) Check(step, tail float64) error {
	if err := firstErr(checkPositive("scale", s.Scale), checkPositive("df", s.DF), checkFinite("mean", s.Mean)); err != nil {
		return err
	}
	if s.DF > MaxDF {
		return &ParamError{Param: "df", Msg: fmt.Sprintf("must be at most %d, got %v; use normal noise instead", MaxDF, s.DF)}
	}
	return spanSymmetric(s.dist(), s.Mean, step, tail, "scale")
}

// Lattice rounds the distribution to the lattice as Round does.
func (s Student) Lattice(step, tail float64) (PMF, float64, error) {
	if err := s.Check(step, tail); err != nil {
		return PMF{}, 0, err
	}
	return roundSymmetric(s.dist(), s.Mean, step, tail, "scale")
}

// Discrete is a noise pmf given by the user: the noise is Values[i] with
// probability Probs[i]. Values are in reading units and must be multiples of
// the step.
type Discrete struct {
	Values []float64
	Probs  []float64
}

// Kind returns KindPMF.
func (Discrete) Kind() string { return KindPMF }

// Check validates the pmf: Values and Probs of the same non-zero length,
// every value finite, a multiple of the step within 1e-9 relative (of the
// larger of the step and the value) and on its own lattice point, every
// probability finite and non-negative, and the probabilities summing to 1
// within 1e-9. Entries are numbered from 1 in messages.
func (d Discrete) Check(step, tail float64) error {
	_, _, _, err := d.offsets(step)
	return err
}

// offsets validates d and returns its lattice offsets and their range.
func (d Discrete) offsets(step float64) (ks []int, lo, hi int, err error) {
	if err := checkStep(step); err != nil {
		return nil, 0, 0, err
	}
	if len(d.Values) == 0 {
		return nil, 0, 0, &ParamError{Param: "values", Msg: "is empty"}
	}
	if len(d.Probs) != len(d.Values) {
		return nil, 0, 0, &ParamError{Param: "probs", Msg: fmt.Sprintf("has %d entries but values has %d", len(d.Probs), len(d.Values))}
	}
	ks = make([]int, len(d.Values))
	seen := make(map[int]int, len(d.Values))
	lo, hi = math.MaxInt, math.MinInt
	for i, v := range d.Values {
		k, err := latticePoint(v, step)
		if err != nil {
			return nil, 0, 0, &ParamError{Param: "values", Msg: fmt.Sprintf("entry %d: %v", i+1, err)}
		}
		if j, ok := seen[k]; ok {
			return nil, 0, 0, &ParamError{Param: "values", Msg: fmt.Sprintf(
				"entry %d (%v) is the lattice point of entry %d (%v)", i+1, v, j+1, d.Values[j])}
		}
		seen[k] = i
		ks[i] = k
		lo, hi = min(lo, k), max(hi, k)
	}
	if n := hi - lo + 1; n > MaxPoints {
		return nil, 0, 0, &ParamError{Param: "values", Msg: fmt.Sprintf("span %d lattice points, more than %d", n, MaxPoints)}
	}
	var sum float64
	for i, p := range d.Probs {
		if math.IsNaN(p) || math.IsInf(p, 0) || p < 0 {
			return nil, 0, 0, &ParamError{Param: "probs", Msg: fmt.Sprintf("entry %d is %v, want a finite number >= 0", i+1, p)}
		}
		sum += p
	}
	if !(math.Abs(sum-1) <= 1e-9) {
		return nil, 0, 0, &ParamError{Param: "probs", Msg: fmt.Sprintf("sum to %v, want 1 (within 1e-9)", sum)}
	}
	return ks, lo, hi, nil
}

// latticePoint returns k with x = k*step within 1e-9 relative.
func latticePoint(x, step float64) (int, error) {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return 0, fmt.Errorf("%v is not a finite number", x)
	}
	r := x / step
	if math.Abs(r) > MaxOffset {
		return 0, fmt.Errorf("%v is %.4g steps from zero, more than %d", x, r, MaxOffset)
	}
	k := math.Round(r)
	if math.Abs(r-k) > 1e-9*math.Max(1, math.Abs(k)) {
		return 0, fmt.Errorf("%v is not a multiple of step %v (nearest %v)", x, step, k*step)
	}
	return int(k), nil
}

// Lattice normalises the probabilities and quantizes them; zero
// probabilities at the ends are trimmed.
func (d Discrete) Lattice(step, tail float64) (PMF, float64, error) {
	ks, lo, hi, err := d.offsets(step)
	if err != nil {
		return PMF{}, 0, err
	}
	w := make([]float64, hi-lo+1)
	for i, k := range ks {
		w[k-lo] = d.Probs[i]
	}
	pmf, err := Quantize(lo, w)
	if err != nil {
		return PMF{}, 0, &ParamError{Param: "probs", Msg: err.Error()}
	}
	return pmf, 0, nil
}

// Samples is noise estimated from measured errors (reading minus true
// value, in reading units): the histogram of the errors, each rounded to
// the nearest multiple of the step (halves away from zero).
type Samples struct {
	Errors []float64 // at least MinSamples finite numbers
}

// Kind returns KindSamples.
func (Samples) Kind() string { return KindSamples }

// Check validates the errors: at least MinSamples, all finite, spanning at
// most MaxPoints lattice points. Entries are numbered from 1 in messages.
func (s Samples) Check(step, tail float64) error {
	_, _, err := s.span(step)
	return err
}

// span validates s and returns the range of its lattice offsets.
func (s Samples) span(step float64) (lo, hi int, err error) {
	if err := checkStep(step); err != nil {
		return 0, 0, err
	}
	if len(s.Errors) < MinSamples {
		return 0, 0, &ParamError{Param: "samples", Msg: fmt.Sprintf("has %d numbers, need at least %d", len(s.Errors), MinSamples)}
	}
	lo, hi = math.MaxInt, math.MinInt
	for i, e := range s.Errors {
		if math.IsNaN(e) || math.IsInf(e, 0) {
			return 0, 0, &ParamError{Param: "samples", Msg: fmt.Sprintf("entry %d is %v, want a finite number", i+1, e)}
		}
		r := math.Round(e / step)
		if math.Abs(r) > MaxOffset {
			return 0, 0, &ParamError{Param: "samples", Msg: fmt.Sprintf("entry %d (%v) is %.4g steps from zero, more than %d", i+1, e, r, MaxOffset)}
		}
		lo, hi = min(lo, int(r)), max(hi, int(r))
	}
	if n := hi - lo + 1; n > MaxPoints {
		return 0, 0, &ParamError{Param: "samples", Msg: fmt.Sprintf("span %d lattice points, more than %d", n, MaxPoints)}
	}
	return lo, hi, nil
}

// Lattice returns the quantized histogram of the rounded errors.
func (s Samples) Lattice(step, tail float64) (PMF, float64, error) {
	lo, hi, err := s.span(step)
	if err != nil {
		return PMF{}, 0, err
	}
	w := make([]float64, hi-lo+1)
	for _, e := range s.Errors {
		w[int(math.Round(e/step))-lo]++
	}
	pmf, err := Quantize(lo, w)
	if err != nil {
		return PMF{}, 0, &ParamError{Param: "samples", Msg: err.Error()}
	}
	return pmf, 0, nil
}

// firstErr returns the first non-nil error.
func firstErr(errs ...error) error {
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	return nil
}

package discretize

import (
	"fmt"
	"math"
)

// MaxPoints is the largest number of lattice points a noise pmf may span.
// A pmf wider than this cannot be solved for anyway, so building it is
// refused with an error that names its size.
const MaxPoints = 1_000_000

// MaxOffset is the largest distance from zero, in steps, that a noise offset
// may have.
const MaxOffset = 1 << 30

// Distribution is a continuous distribution on the real line. The types of
// gonum.org/v1/gonum/stat/distuv satisfy it.
type Distribution interface {
	CDF(x float64) float64
	Survival(x float64) float64
	Quantile(p float64) float64
}

// Round puts a continuous noise distribution on the lattice of the given
// step by rounding each outcome to the nearest lattice point:
//
//	p(k) = F((k+1/2)h) - F((k-1/2)h).
//
// The lattice runs from the bin containing the quantile tail/2 to the bin
// containing the quantile 1-tail/2; the mass beyond those two bins is added
// to them, and that moved mass is returned as cut. Masses below the median
// come from the CDF and masses above it from the survival function, so both
// tails keep their precision. The pmf is then quantized with Quantize: bins
// whose mass is below half the grain 2^-DenomBits round to zero, and those
// at the ends are trimmed, so tails much below 1e-16 change nothing.
//
// Round needs 0 < tail < 0.5. Below about 1e-15 the quantile 1-tail/2 is
// no longer representable; the symmetric kinds (Normal, Laplace, ...)
// reflect the lower quantile instead and have no such limit.
func Round(d Distribution, step, tail float64) (pmf PMF, cut float64, err error) {
	if err := checkStepTail(step, tail); err != nil {
		return PMF{}, 0, err
	}
	center := d.Quantile(0.5)
	if math.IsNaN(center) || math.IsInf(center, 0) {
		return PMF{}, 0, fmt.Errorf("the median is %v", center)
	}
	r := rounder{d: d, center: center, step: step}
	lo, hi, err := r.span(d.Quantile(tail/2), d.Quantile(1-tail/2), tail, "")
	if err != nil {
		return PMF{}, 0, err
	}
	return r.round(lo, hi)
}

// roundSymmetric is Round for a distribution symmetric about center: the
// upper quantile and the upper tail masses are reflections of the lower
// ones. param names the scale parameter blamed when the lattice is too
// wide.
func roundSymmetric(d Distribution, center, step, tail float64, param string) (PMF, float64, error) {
	r := rounder{d: d, center: center, step: step, symmetric: true}
	lo, hi, err := r.spanSymmetric(tail, param)
	if err != nil {
		return PMF{}, 0, err
	}
	return r.round(lo, hi)
}

// spanSymmetric validates the step, the tail and the size of the lattice
// of a distribution symmetric about center, without rounding it.
func spanSymmetric(d Distribution, center, step, tail float64, param string) error {
	r := rounder{d: d, center: center, step: step, symmetric: true}
	_, _, err := r.spanSymmetric(tail, param)
	return err
}

// rounder puts one distribution on the lattice.
type rounder struct {
	d         Distribution
	center    float64 // median; the centre of symmetry when symmetric
	step      float64
	symmetric bool
}

// lower returns the mass below x <= center.
func (r rounder) lower(x float64) float64 { return r.d.CDF(x) }

// upper returns the mass above x >= center.
func (r rounder) upper(x float64) float64 {
	if r.symmetric {
		return r.d.CDF(2*r.center - x)
	}
	return r.d.Survival(x)
}

// below returns the mass below x, above the mass above x.
func (r rounder) below(x float64) float64 {
	if x <= r.center {
		return r.lower(x)
	}
	return 1 - r.upper(x)
}

func (r rounder) above(x float64) float64 {
	if x >= r.center {
		return r.upper(x)
	}
	return 1 - r.lower(x)
}

// edge returns the lower edge of bin k.
func (r rounder) edge(k int) float64 { return (float64(k) - 0.5) * r.step }

// spanSymmetric returns the lattice bins of the cut quantiles, the upper
// one reflected from the lower one.
func (r rounder) spanSymmetric(tail float64, param string) (lo, hi int, err error) {
	if err := checkStepTail(r.step, tail); err != nil {
		return 0, 0, err
	}
	q := r.d.Quantile(tail / 2)
	return r.span(q, 2*r.center-q, tail, param)
}

// span validates the cut quantiles qlo and qhi and returns the lattice bins
// that contain them. param names the scale parameter blamed for a lattice
// that is too wide ("" for none).
func (r rounder) span(qlo, qhi, tail float64, param string) (lo, hi int, err error) {
	for _, q := range []float64{qlo, qhi} {
		if math.IsNaN(q) || math.IsInf(q, 0) {
			return 0, 0, &ParamError{Param: "tail", Msg: fmt.Sprintf("a cut quantile is %v; use a larger tail", q)}
		}
	}
	flo, fhi := math.Floor(qlo/r.step+0.5), math.Floor(qhi/r.step+0.5)
	if n := fhi - flo + 1; n > MaxPoints {
		return 0, 0, &ParamError{Param: param, Msg: fmt.Sprintf(
			"gives %.4g lattice points, more than %d; use a coarser step or a larger tail", n, MaxPoints)}
	}
	if far := math.Max(math.Abs(flo), math.Abs(fhi)); far > MaxOffset {
		p := ""
		if param != "" {
			p = "mean"
		}
		return 0, 0, &ParamError{Param: p, Msg: fmt.Sprintf(
			"puts the noise %.4g steps from zero, more than %d", far, MaxOffset)}
	}
	lo, hi = int(flo), int(fhi)
	// Guard against quantile routines that lose accuracy far out in the
	// tail: the mass cut must not exceed the tail.
	if cut := r.cut(lo, hi); !(cut <= tail*(1+1e-6)) {
		return 0, 0, &ParamError{Param: param, Msg: fmt.Sprintf(
			"the cut quantiles are inaccurate (they cut %v, more than tail %v): parameters outside the distribution's reliable range", cut, tail)}
	}
	return lo, hi, nil
}

// cut returns the mass beyond bins lo..hi.
func (r rounder) cut(lo, hi int) float64 { return r.below(r.edge(lo)) + r.above(r.edge(hi+1)) }

// round computes the rounded pmf on bins lo..hi, folding the tails into
// the end bins.
func (r rounder) round(lo, hi int) (PMF, float64, error) {
	w := make([]float64, hi-lo+1)
	if lo == hi {
		w[0] = 1
	} else {
		w[0] = r.below(r.edge(lo + 1))
		w[len(w)-1] = r.above(r.edge(hi))
		for k := lo + 1; k < hi; k++ {
			a, b := r.edge(k), r.edge(k+1)
			var p float64
			switch {
			case b <= r.center:
				p = r.lower(b) - r.lower(a)
			case a >= r.center:
				p = r.upper(a) - r.upper(b)
			default:
				p = 1 - r.lower(a) - r.upper(b)
			}
			w[k-lo] = math.Max(p, 0) // guard against non-monotone round-off
		}
	}
	pmf, err := Quantize(lo, w)
	if err != nil {
		return PMF{}, 0, fmt.Errorf("rounding to the lattice: %w", err)
	}
	return pmf, r.cut(lo, hi), nil
}

// checkStepTail validates the lattice step and the cut tail mass.
func checkStepTail(step, tail float64) error {
	if err := checkStep(step); err != nil {
		return err
	}
	if !(tail > 0 && tail < 0.5) {
		return &ParamError{Param: "tail", Msg: fmt.Sprintf("must be > 0 and < 0.5, got %v", tail)}
	}
	return nil
}

// checkStep validates the lattice step.
func checkStep(step float64) error { return checkPositive("step", step) }

// checkPositive validates a parameter that must be finite and positive.
func checkPositive(param string, x float64) error {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return &ParamError{Param: param, Msg: fmt.Sprintf("must be a finite number > 0, got %v", x)}
	}
	if x <= 0 {
		return &ParamError{Param: param, Msg: fmt.Sprintf("must be > 0, got %v", x)}
	}
	return nil
}

// checkFinite validates a parameter that must be finite.
func checkFinite(param string, x float64) error {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return &ParamError{Param: param, Msg: fmt.Sprintf("must be a finite number, got %v", x)}
	}
	return nil
}

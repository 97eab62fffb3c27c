package discretize

import (
	"errors"
	"math"
	"math/big"
	"strings"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// ulp is the quantization grain 2^-52.
var ulp = math.Ldexp(1, -DenomBits)

// checkExactSum asserts that p is a valid lattice pmf whose probabilities,
// added as rationals, are exactly 1.
func checkExactSum(t *testing.T, p PMF) {
	t.Helper()
	if err := p.Check(); err != nil {
		t.Fatalf("invalid pmf: %v", err)
	}
	sum := new(big.Rat)
	for k := p.Lo; k <= p.Hi(); k++ {
		sum.Add(sum, p.Rat(k))
	}
	if sum.Cmp(big.NewRat(1, 1)) != 0 {
		t.Fatalf("probabilities sum to %v, not exactly 1", sum)
	}
}

// TestContinuousMatchesCDF checks every continuous kind bin by bin against
// CDF differences computed directly with gonum's distuv (the reference
// library), including the end bins with their folded tails and the moved
// mass.
func TestContinuousMatchesCDF(t *testing.T) {
	cases := []struct {
		name  string
		noise Noise
		dist  Distribution // the distuv distribution the noise stands for
		step  float64
		tail  float64 // 1e-9 when zero
	}{
		{"normal", Normal{Sigma: 0.8}, distuv.Normal{Sigma: 0.8}, 0.5, 0},
		{"normal biased", Normal{Sigma: 0.8, Mean: 0.37}, distuv.Normal{Mu: 0.37, Sigma: 0.8}, 0.5, 0},
		{"normal fine", Normal{Sigma: 1.3, Mean: -2}, distuv.Normal{Mu: -2, Sigma: 1.3}, 0.05, 0},
		{"laplace", Laplace{Scale: 0.6, Mean: 0.1}, distuv.Laplace{Mu: 0.1, Scale: 0.6}, 0.25, 0},
		{"logistic", Logistic{Scale: 0.4, Mean: -0.2}, distuv.Logistic{Mu: -0.2, S: 0.4}, 0.25, 0},
		{"uniform", Uniform{HalfWidth: 1.1, Mean: 0.05}, distuv.Uniform{Min: -1.05, Max: 1.15}, 0.25, 0},
		{"student", Student{Scale: 0.5, DF: 4, Mean: 0.3}, distuv.StudentsT{Mu: 0.3, Sigma: 0.5, Nu: 4}, 0.25, 0},
		{"student df 1", Student{Scale: 0.01, DF: 1}, distuv.StudentsT{Sigma: 0.01, Nu: 1}, 0.5, 1e-4},
		{"normal wide tail", Normal{Sigma: 2, Mean: 0.1}, distuv.Normal{Mu: 0.1, Sigma: 2}, 1, 0.05},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			tail := c.tail
			if tail == 0 {
				tail = 1e-9
			}
			p, cut, err := c.noise.Lattice(c.step, tail)
			if err != nil {
				t.Fatal(err)
			}
			checkExactSum(t, p)
			h := c.step
			F := c.dist.CDF
			S := c.dist.Survival
			lo, hi := p.Lo, p.Hi()
			edge := func(k int) float64 { return (float64(k) - 0.5) * h }
			// The end bins contain the cut quantiles.
			if !(F(edge(lo)) <= tail/2 && F(edge(lo+1)) > tail/2) {
				t.Errorf("lower quantile not in bin %d: F at its edges %v, %v", lo, F(edge(lo)), F(edge(lo+1)))
			}
			if !(S(edge(hi+1)) <= tail/2 && S(edge(hi)) > tail/2) {
				t.Errorf("upper quantile not in bin %d: S at its edges %v, %v", hi, S(edge(hi)), S(edge(hi+1)))
			}
			// Bins: CDF differences, the end bins with everything beyond.
			// The largest bin absorbs the quantization residue, at most
			// half a grain per bin.
			largest := 0
			for i, n := range p.Num {
				if n > p.Num[largest] {
					largest = i
				}
			}
			for k := lo; k <= hi; k++ {
				var want float64
				switch k {
				case lo:
					want = F(edge(lo + 1))
				case hi:
					want = S(edge(hi))
				default:
					want = F(edge(k+1)) - F(edge(k))
				}
				tol := 1e-15
				if k-lo == largest {
					tol = float64(len(p.Num)) * ulp
				}
				if got := p.Prob(k); math.Abs(got-want) > tol {
					t.Errorf("p(%d) = %v, distuv gives %v (diff %.3g)", k, got, want, got-want)
				}
			}
			// The moved mass is the mass beyond the end bins, at most tail.
			// distuv's normal Survival is (1-erf)/2, precise to 1e-16
			// absolute only; TestNormalKnownBin checks the relative
			// precision of the cut against math.Erfc.
			wantCut := F(edge(lo)) + S(edge(hi+1))
			if math.Abs(cut-wantCut) > 2e-16+1e-12*wantCut {
				t.Errorf("cut = %v, mass beyond the end bins is %v", cut, wantCut)
			}
			if cut < 0 || cut > tail {
				t.Errorf("cut = %v outside [0, tail=%v]", cut, tail)
			}
		})
	}
}

// TestNormalKnownBin checks the central bin of a standard normal at step 1
// against P(|Z| < 1/2) = erf(1/(2 sqrt 2)), computed with math.Erf rather
// than gonum (standard identity, common knowledge).
func TestNormalKnownBin(t *testing.T) {
	p, cut, err := Normal{Sigma: 1}.Lattice(1, 1e-9)
	if err != nil {
		t.Fatal(err)
	}
	want := math.Erf(0.5 / math.Sqrt2)
	if got := p.Prob(0); math.Abs(got-want) > float64(len(p.Num))*ulp {
		t.Errorf("p(0) = %v, want %v", got, want)
	}
	// p(1) = Phi(1.5) - Phi(0.5) = (erf(1.5/sqrt2) - erf(0.5/sqrt2))/2.
	want1 := (math.Erf(1.5/math.Sqrt2) - math.Erf(0.5/math.Sqrt2)) / 2
	if got := p.Prob(1); math.Abs(got-want1) > 2e-16 {
		t.Errorf("p(1) = %v, want %v", got, want1)
	}
	// The quantiles of 5e-10 are at -/+6.109 sigma (Phi^-1(5e-10), from
	// memory), so the lattice runs from -6 to 6 and the cut mass is
	// 2*Phi(-6.5) = erfc(6.5/sqrt2).
	if p.Lo != -6 || p.Hi() != 6 {
		t.Errorf("lattice [%d, %d], want [-6, 6]", p.Lo, p.Hi())
	}
	if wantCut := math.Erfc(6.5 / math.Sqrt2); math.Abs(cut-wantCut) > 1e-12*wantCut {
		t.Errorf("cut = %v, want %v", cut, wantCut)
	}
}

// TestUniformExact checks uniform noise whose bins are exact dyadic
// fractions, derived by hand: U(-1, 1) at step 1/2 puts 1/8 on +-1 step
// edges of width 1/4 and 1/4 on the full bins in between.
func TestUniformExact(t *testing.T) {
	cases := []struct {
		name  string
		noise Uniform
		step  float64
		lo    int
		num   []uint64
	}{
		{"centred", Uniform{HalfWidth: 1}, 0.5, -2, []uint64{Denom / 8, Denom / 4, Denom / 4, Denom / 4, Denom / 8}},
		// U(-0.75, 1.25): bins -1..2 each hold a width of 1/2 out of 2; the
		// bin at -2 is empty and trimmed.
		{"shifted", Uniform{HalfWidth: 1, Mean: 0.25}, 0.5, -1, []uint64{Denom / 4, Denom / 4, Denom / 4, Denom / 4}},
		{"inside one bin", Uniform{HalfWidth: 0.2, Mean: 1.1}, 1, 1, []uint64{Denom}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			p, cut, err := c.noise.Lattice(c.step, 1e-9)
			if err != nil {
				t.Fatal(err)
			}
			checkExactSum(t, p)
			if p.Lo != c.lo || len(p.Num) != len(c.num) {
				t.Fatalf("pmf %d %v, want %d %v", p.Lo, p.Num, c.lo, c.num)
			}
			for i := range c.num {
				if p.Num[i] != c.num[i] {
					t.Errorf("Num[%d] = %d, want %d", i, p.Num[i], c.num[i])
				}
			}
			if cut != 0 {
				t.Errorf("cut = %v, want 0 (bounded support)", cut)
			}
		})
	}
}

// TestNarrowCollapses checks that noise much narrower than the step becomes
// a single lattice point: the rounded mean.
func TestNarrowCollapses(t *testing.T) {
	cases := []struct {
		name  string
		noise Noise
		step  float64
		at    int
	}{
		{"normal", Normal{Sigma: 1e-6}, 1, 0},
		{"normal biased", Normal{Sigma: 1e-9, Mean: 0.7}, 1, 1},
		{"normal biased negative", Normal{Sigma: 1e-300, Mean: -1.3}, 0.5, -3},
		{"laplace", Laplace{Scale: 1e-4, Mean: 2}, 1, 2},
		{"logistic", Logistic{Scale: 1e-4}, 1, 0},
		{"student", Student{Scale: 1e-4, DF: 30}, 1, 0},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			p, cut, err := c.noise.Lattice(c.step, 1e-9)
			if err != nil {
				t.Fatal(err)
			}
			if p.Lo != c.at || len(p.Num) != 1 || p.Num[0] != Denom {
				t.Errorf("pmf Lo=%d Num=%v, want the single point %d", p.Lo, p.Num, c.at)
			}
			if !(cut >= 0 && cut < 1e-9) {
				t.Errorf("cut = %v", cut)
			}
		})
	}
}

// TestSheppard checks the moments of a normal pmf on a fine lattice. The
// rounded variable has variance sigma^2 + h^2/12 and mean mu, with errors
// exponentially small in (sigma/h)^2 (Sheppard's correction, common
// knowledge).
func TestSheppard(t *testing.T) {
	const sigma, mu, h = 1.0, 0.3, 0.05
	p, _, err := Normal{Sigma: sigma, Mean: mu}.Lattice(h, 1e-9)
	if err != nil {
		t.Fatal(err)
	}
	mean := p.Mean() * h
	v := math.Pow(p.Std()*h, 2)
	if math.Abs(mean-mu) > 1e-9 {
		t.Errorf("mean %v, want %v", mean, mu)
	}
	want := sigma*sigma + h*h/12
	if math.Abs(v-want) > 1e-8 {
		t.Errorf("variance %v, want sigma^2 + h^2/12 = %v (diff %.3g)", v, want, v-want)
	}
	// The correction is visible: without it the variance is off by h^2/12.
	if math.Abs(v-sigma*sigma) < 1e-4 {
		t.Errorf("variance %v indistinguishable from sigma^2", v)
	}
}

// TestSmallTail checks a tail far below the float64 resolution near 1. The
// cut quantiles are at +-b*log(1/tail) (closed form of the Laplace
// quantile, common knowledge), hundreds of steps out, but the bins there
// hold less than half the quantization grain and are trimmed: the pmf ends
// at the outermost bin of mass at least 2^-53, whose mass has the closed
// form (exp((k+1/2)h/b) - exp((k-1/2)h/b))/2 for k < 0.
func TestSmallTail(t *testing.T) {
	const b, h, tail = 1.0, 0.5, 1e-200
	if err := (Laplace{Scale: b}).Check(h, tail); err != nil {
		t.Fatal(err)
	}
	p, cut, err := Laplace{Scale: b}.Lattice(h, tail)
	if err != nil {
		t.Fatal(err)
	}
	checkExactSum(t, p)
	mass := func(k int) float64 {
		return (math.Exp((float64(k)+0.5)*h/b) - math.Exp((float64(k)-0.5)*h/b)) / 2
	}
	want := -1
	for mass(want-1) >= math.Ldexp(1, -DenomBits-1) {
		want--
	}
	if p.Lo != want || p.Hi() != -want {
		t.Errorf("lattice [%d, %d], want [%d, %d]", p.Lo, p.Hi(), want, -want)
	}
	if cut <= 0 || cut > tail {
		t.Errorf("cut = %v, want in (0, %v]", cut, tail)
	}
}

// TestRoundSkewed checks Round on a skewed gonum distribution, whose median
// is not its centre of symmetry.
func TestRoundSkewed(t *testing.T) {
	d := distuv.Gamma{Alpha: 2, Beta: 3}
	const h, tail = 0.1, 1e-6
	p, cut, err := Round(d, h, tail)
	if err != nil {
		t.Fatal(err)
	}
	checkExactSum(t, p)
	edge := func(k int) float64 { return (float64(k) - 0.5) * h }
	for k := p.Lo + 1; k < p.Hi(); k++ {
		want := d.CDF(edge(k+1)) - d.CDF(edge(k))
		if got := p.Prob(k); math.Abs(got-want) > float64(len(p.Num))*ulp {
			t.Errorf("p(%d) = %v, distuv gives %v", k, got, want)
		}
	}
	if want := d.CDF(edge(p.Lo)) + d.Survival(edge(p.Hi()+1)); math.Abs(cut-want) > 1e-12 {
		t.Errorf("cut = %v, want %v", cut, want)
	}
}

// TestExact checks the noise-free channel.
func TestExact(t *testing.T) {
	p, cut, err := Exact{}.Lattice(0.1, 1e-9)
	if err != nil {
		t.Fatal(err)
	}
	if p.Lo != 0 || p.Hi() != 0 || p.Num[0] != Denom || cut != 0 {
		t.Errorf("exact pmf %+v cut %v", p, cut)
	}
}

// TestDiscrete checks a user pmf: lattice placement, normalisation and
// exact quantization.
func TestDiscrete(t *testing.T) {
	// 0.3/0.1 is 2.9999999999999996 in float64: within tolerance.
	d := Discrete{Values: []float64{0.3, -0.2, 0, 0.1}, Probs: []float64{0.125, 0.25, 0.5, 0.125}}
	p, cut, err := d.Lattice(0.1, 0)
	if err != nil {
		t.Fatal(err)
	}
	checkExactSum(t, p)
	want := map[int]float64{-2: 0.25, -1: 0, 0: 0.5, 1: 0.125, 2: 0, 3: 0.125}
	if p.Lo != -2 || p.Hi() != 3 || cut != 0 {
		t.Fatalf("lattice [%d, %d] cut %v, want [-2, 3] cut 0", p.Lo, p.Hi(), cut)
	}
	for k, w := range want {
		if p.Prob(k) != w {
			t.Errorf("p(%d) = %v, want %v", k, p.Prob(k), w)
		}
	}
	// Zero probabilities at the ends are trimmed; a sum off by 5e-10 is
	// normalised.
	d = Discrete{Values: []float64{-1, 0, 1}, Probs: []float64{0, 0.5 + 5e-10, 0.5}}
	if p, _, err = d.Lattice(0.5, 0); err != nil {
		t.Fatal(err)
	}
	checkExactSum(t, p)
	if p.Lo != 0 || p.Hi() != 2 {
		t.Errorf("lattice [%d, %d], want [0, 2]", p.Lo, p.Hi())
	}
}

// TestSamples checks the histogram of measured errors on counts whose
// frequencies are exact dyadic fractions (16 samples).
func TestSamples(t *testing.T) {
	// At step 0.5: -0.76 -> -2, -0.6 -> -1, -0.25 -> -1 (halves away from
	// zero), the eight near 0 -> 0, 0.26..0.74 -> 1, 0.75 -> 2.
	errs := []float64{-0.76, -0.6, -0.25, 0, 0.1, -0.1, 0.2, -0.2, 0.24, -0.24, 0.05, 0.26, 0.5, 0.6, 0.74, 0.75}
	counts := map[int]uint64{-2: 1, -1: 2, 0: 8, 1: 4, 2: 1}
	p, cut, err := Samples{Errors: errs}.Lattice(0.5, 0)
	if err != nil {
		t.Fatal(err)
	}
	checkExactSum(t, p)
	if p.Lo != -2 || p.Hi() != 2 || cut != 0 {
		t.Fatalf("lattice [%d, %d] cut %v", p.Lo, p.Hi(), cut)
	}
	for k, c := range counts {
		if got, want := p.Num[k-p.Lo], c*Denom/16; got != want {
			t.Errorf("Num at %d = %d, want %d (count %d of 16)", k, got, want, c)
		}
	}
}

// TestParamErrors checks that every invalid parameter is refused with an
// error naming it.
func TestParamErrors(t *testing.T) {
	nan, inf := math.NaN(), math.Inf(1)
	tenZeros := make([]float64, 10)
	cases := []struct {
		name  string
		noise Noise
		step  float64
		tail  float64
		param string
		msg   string // part of the message
	}{
		{"sigma negative", Normal{Sigma: -1}, 1, 1e-9, "sigma", "must be > 0, got -1"},
		{"sigma zero", Normal{Sigma: 0}, 1, 1e-9, "sigma", "must be > 0, got 0"},
		{"sigma NaN", Normal{Sigma: nan}, 1, 1e-9, "sigma", "NaN"},
		{"mean Inf", Normal{Sigma: 1, Mean: inf}, 1, 1e-9, "mean", "+Inf"},
		{"mean far", Normal{Sigma: 1, Mean: 1e12}, 1, 1e-9, "mean", "steps from zero"},
		{"step zero", Normal{Sigma: 1}, 0, 1e-9, "step", "must be > 0"},
		{"step Inf", Exact{}, inf, 1e-9, "step", "finite"},
		{"tail zero", Normal{Sigma: 1}, 1, 0, "tail", "got 0"},
		{"tail half", Laplace{Scale: 1}, 1, 0.5, "tail", "< 0.5"},
		{"sigma too wide", Normal{Sigma: 1e6}, 1, 1e-9, "sigma", "lattice points"},
		{"scale zero", Laplace{Scale: 0}, 1, 1e-9, "scale", "must be > 0"},
		{"logistic scale", Logistic{Scale: -2}, 1, 1e-9, "scale", "got -2"},
		{"half width", Uniform{HalfWidth: nan}, 1, 1e-9, "half_width", "NaN"},
		{"half width unresolved", Uniform{HalfWidth: 1e-10, Mean: 1e8}, 1, 1e-9, "half_width", "too small"},
		{"df zero", Student{Scale: 1, DF: 0}, 1, 1e-9, "df", "must be > 0"},
		{"df huge", Student{Scale: 1, DF: 1e5}, 1, 1e-9, "df", "at most 1000"},
		{"df heavy tail", Student{Scale: 1, DF: 0.5}, 1, 1e-9, "scale", "lattice points"},
		{"pmf empty", Discrete{}, 1, 0, "values", "empty"},
		{"pmf lengths", Discrete{Values: []float64{0, 1}, Probs: []float64{1}}, 1, 0, "probs", "has 1 entries but values has 2"},
		{"pmf off lattice", Discrete{Values: []float64{0, 0.3}, Probs: []float64{0.5, 0.5}}, 0.25, 0, "values", "entry 2: 0.3 is not a multiple of step 0.25"},
		{"pmf barely off lattice", Discrete{Values: []float64{0, 1 + 1e-8}, Probs: []float64{0.5, 0.5}}, 1, 0, "values", "1.00000001 is not a multiple"},
		{"pmf repeated point", Discrete{Values: []float64{0, 1, 1 + 1e-12}, Probs: []float64{0.5, 0.25, 0.25}}, 1, 0, "values", "entry 3"},
		{"pmf NaN value", Discrete{Values: []float64{nan}, Probs: []float64{1}}, 1, 0, "values", "NaN"},
		{"pmf negative prob", Discrete{Values: []float64{0, 1}, Probs: []float64{1.1, -0.1}}, 1, 0, "probs", "entry 2 is -0.1"},
		{"pmf NaN prob", Discrete{Values: []float64{0, 1}, Probs: []float64{nan, 1}}, 1, 0, "probs", "entry 1 is NaN"},
		{"pmf sum", Discrete{Values: []float64{0, 1}, Probs: []float64{0.5, 0.4}}, 1, 0, "probs", "sum to 0.9"},
		{"pmf too wide", Discrete{Values: []float64{0, 2e6}, Probs: []float64{0.5, 0.5}}, 1, 0, "values", "lattice points"},
		{"samples few", Samples{Errors: []float64{1, 2, 3}}, 1, 0, "samples", "has 3 numbers, need at least 10"},
		{"samples NaN", Samples{Errors: append([]float64{nan}, tenZeros...)}, 1, 0, "samples", "entry 1 is NaN"},
		{"samples too wide", Samples{Errors: append([]float64{-1e6, 1e6}, tenZeros...)}, 1, 0, "samples", "lattice points"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			checkErr := func(what string, err error) {
				t.Helper()
				var pe *ParamError
				if !errors.As(err, &pe) {
					t.Fatalf("%s: got %v, want a *ParamError", what, err)
				}
				if pe.Param != c.param || !strings.Contains(pe.Msg, c.msg) {
					t.Errorf("%s: got %q, want param %q and %q in the message", what, err, c.param, c.msg)
				}
			}
			checkErr("Check", c.noise.Check(c.step, c.tail))
			_, _, err := c.noise.Lattice(c.step, c.tail)
			checkErr("Lattice", err)
		})
	}
}

// TestKinds checks that every kind has a noise type reporting it.
func TestKinds(t *testing.T) {
	noises := []Noise{Exact{}, Discrete{}, Normal{}, Laplace{}, Logistic{}, Uniform{}, Student{}, Samples{}}
	kinds := Kinds()
	if len(kinds) != len(noises) {
		t.Fatalf("%d kinds, %d noise types", len(kinds), len(noises))
	}
	for i, n := range noises {
		if n.Kind() != kinds[i] {
			t.Errorf("noise %T has kind %q, want %q", n, n.Kind(), kinds[i])
		}
	}
}

// TestQuantizeOverflow checks weights that are finite but whose sum
// overflows float64: they must still be normalised, here to two halves.
func TestQuantizeOverflow(t *testing.T) {
	p, err := Quantize(3, []float64{math.MaxFloat64, 0, math.MaxFloat64})
	if err != nil {
		t.Fatal(err)
	}
	if p.Lo != 3 || len(p.Num) != 3 || p.Num[0] != Denom/2 || p.Num[1] != 0 || p.Num[2] != Denom/2 {
		t.Errorf("got Lo=%d Num=%v, want 3 [2^51 0 2^51]", p.Lo, p.Num)
	}
}

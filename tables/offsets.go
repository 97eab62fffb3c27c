package tables

import "math"

// OffsetHalfSteps returns the offset theta of each channel, in half steps,
// chosen on its own (design notes, "Heuristics"): the multiple of half a
// step that minimises the worst-case regret of "pick the channel when
// r + theta > r0, share on equality" against a reference channel read
// exactly. Among worst cases equal to within 1e-12 relative it takes the
// smallest |theta|, and of +t and -t the negative one.
func (l *Layout) OffsetHalfSteps() []int {
	out := make([]int, l.N())
	for i := range out {
		out[i], _ = offsetOne(l.Lo[i], l.P[i])
	}
	return out
}

// offsetOne returns the best offset in half steps for one channel whose
// noise pmf is p from offset lo, and its worst-case regret in steps against
// an exact reference.
func offsetOne(lo int, p []float64) (half int, worst float64) {
	hi := lo + len(p) - 1
	// Tail sums of the pmf: below[j] is the mass of offsets lo..lo+j-1,
	// summed from the low end, above[j] the mass of lo+j..hi, summed from
	// the high end, so that small tails keep their relative accuracy.
	below := make([]float64, len(p)+1)
	above := make([]float64, len(p)+1)
	for k, pk := range p {
		below[k+1] = below[k] + pk
	}
	for k := len(p) - 1; k >= 0; k-- {
		above[k] = above[k+1] + p[k]
	}
	// An offset beyond the noise range only adds regret: the rule would
	// always or never pick the channel.
	mlo, mhi := -2*hi-2, -2*lo+2
	first := true
	for m := mlo; m <= mhi; m++ {
		w := offsetWorst(lo, p, below, above, m)
		switch {
		case first:
			half, worst, first = m, w, false
		case w < worst*(1-1e-12) && worst-w > 0:
			half, worst = m, w
		case math.Abs(w-worst) <= 1e-12*math.Max(w, worst):
			if abs(m) < abs(half) || (abs(m) == abs(half) && m < half) {
				half = m
				if w < worst {
					worst = w
				}
			}
		}
	}
	return half, worst
}

// offsetWorst is the worst-case regret, in steps, of the two-channel offset
// rule with offset m half steps against an exact reference; below and
// above are the tail sums of p (see offsetOne).
func offsetWorst(lo int, p, below, above []float64, m int) float64 {
	hi := lo + len(p) - 1
	r := abs(lo) + abs(hi) + abs(m) + 2
	clamp := func(j int) int { return min(max(j, 0), len(p)) }
	var worst float64
	for d := -r; d <= r; d++ {
		if d == 0 {
			continue
		}
		// d = v_channel - v_reference. With k the pmf index of the
		// noise, the rule picks the channel when 2k > x and shares on
		// 2k = x, where x = -m - 2d - 2lo. It is wrong when it picks
		// the lower channel: below the threshold for d > 0, above it
		// for d < 0; half of the mass at equality.
		x := -m - 2*d - 2*lo
		var wrong float64
		if d > 0 {
			wrong = below[clamp(ceilHalf(x))]
		} else {
			wrong = above[clamp(floorHalf(x)+1)]
		}
		if x%2 == 0 && x/2 >= 0 && x/2 < len(p) {
			wrong += p[x/2] / 2
		}
		if reg := float64(abs(d)) * wrong; reg > worst {
			worst = reg
		}
	}
	return worst
}

// floorHalf and ceilHalf return floor(x/2) and ceil(x/2).
func floorHalf(x int) int { return x >> 1 }
func ceilHalf(x int) int  { return -((-x) >> 1) }

func abs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}

// OffsetWidth returns the widening, in steps, that evaluating the offset
// rule with the given half-step offsets needs on top of the layout's D:
// twice the largest |theta|, rounded up to whole steps.
func OffsetWidth(half []int) int {
	m := 0
	for _, h := range half {
		if abs(h) > m {
			m = abs(h)
		}
	}
	return m // 2 * (m/2 steps) = m steps
}

package plot

import (
	"fmt"
	"image/color"
	"math"
	"math/big"
	"strconv"

	gplot "gonum.org/v1/plot"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables/result"
)

// channelColors are the colours of the channels in decision pictures, in
// channel order. They are far apart in hue and lightness so that blends of
// two of them differ from each, and they stay distinct for the common kinds
// of colour blindness (the Okabe-Ito set, common practice).
var channelColors = [3]color.RGBA{
	{R: 0x00, G: 0x72, B: 0xb2, A: 0xff}, // blue
	{R: 0xe6, G: 0x9f, B: 0x00, A: 0xff}, // orange
	{R: 0x00, G: 0x9e, B: 0x73, A: 0xff}, // bluish green
}

// Colours of the rules in the regret panel, of the certificate bounds and
// of the marks on cells.
var (
	optimalColor = color.RGBA{A: 0xff}                            // black
	greedyColor  = color.RGBA{R: 0xd5, G: 0x5e, B: 0x00, A: 0xff} // vermillion
	offsetColor  = color.RGBA{R: 0xcc, G: 0x79, B: 0xa7, A: 0xff} // reddish purple
	boundColor   = color.RGBA{R: 0x60, G: 0x60, B: 0x60, A: 0xff} // grey
	shadeColor   = color.RGBA{R: 0xe4, G: 0xe4, B: 0xe4, A: 0xff} // light grey
	markColor    = color.RGBA{R: 0x20, G: 0x20, B: 0x20, A: 0xff} // near black
	tieColor     = color.RGBA{R: 0x40, G: 0x40, B: 0x40, A: 0xff} // dark grey
)

// axisLabel returns the label of an axis showing quantity q in the
// model's reading unit, e.g. "r_B - r_A (dB)".
func axisLabel(q string, m *discretize.Model) string {
	if m.Unit == "" {
		return q + " (reading units)"
	}
	return q + " (" + m.Unit + ")"
}

// units converts an exact figure in steps to reading units as a float64.
func units(steps *big.Rat, step float64) float64 {
	return result.Float(result.Units(steps, step))
}

// number formats a figure in reading units for a legend or title.
func number(x float64) string {
	return strconv.FormatFloat(x, 'g', 5, 64)
}

// withUnit formats a figure with the model's unit.
func withUnit(x float64, m *discretize.Model) string {
	if m.Unit == "" {
		return number(x)
	}
	return fmt.Sprintf("%s %s", number(x), m.Unit)
}

// blend returns the colour of a randomized cell: the channel colours
// weighted by the probabilities p (one per colour), lightened halfway
// towards white so that a randomized cell never matches a pure channel
// colour.
func blend(p []float64) color.RGBA {
	var r, g, b, sum float64
	for i, x := range p {
		c := channelColors[i]
		r += x * float64(c.R)
		g += x * float64(c.G)
		b += x * float64(c.B)
		sum += x
	}
	if sum > 0 {
		r, g, b = r/sum, g/sum, b/sum
	}
	light := func(v float64) uint8 { return uint8(0.5*v + 0.5*255 + 0.5) }
	return color.RGBA{R: light(r), G: light(g), B: light(b), A: 0xff}
}

// ticks is the axis ticker of the pictures: labelled ticks at a round
// spacing (1, 2 or 5 times a power of ten) giving between 5 and 10 labels,
// with an unlabelled tick halfway between.
type ticks struct{}

// Ticks implements plot.Ticker.
func (ticks) Ticks(lo, hi float64) []gplot.Tick {
	if !(hi > lo) || math.IsInf(lo, 0) || math.IsInf(hi, 0) {
		return nil
	}
	span := hi - lo
	step := math.Pow(10, math.Floor(math.Log10(span/5)))
	for _, f := range []float64{1, 2, 5, 10} {
		if span/(f*step) <= 10 {
			step *= f
			break
		}
	}
	// Decimals needed to print multiples of step exactly.
	dec := max(0, -int(math.Floor(math.Log10(step)+1e-9)))
	var out []gplot.Tick
	for k := math.Ceil(lo/step*2 - 1e-9); k <= hi/step*2+1e-9; k++ {
		v := k * step / 2
		t := gplot.Tick{Value: v}
		if int64(k)%2 == 0 {
			if math.Abs(v) < step*1e-9 {
				v = 0 // no "-0"
			}
			t.Label = strconv.FormatFloat(v, 'f', dec, 64)
		}
		out = append(out, t)
	}
	return out
}

package plot

import (
	"fmt"
	"image/color"
	"math"

	gplot "gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/result"
)

// pairData is what the two-channel picture shows, in steps. Channel A is
// channel 0, channel B channel 1.
type pairData struct {
	// diffs are the reading differences r_B - r_A: the cells of the table
	// and a margin of forced cells on each side, widened to vals.
	diffs []int
	// pick[i][k] is the probability that the optimal table picks channel
	// i at reading difference diffs[k].
	pick [2][]float64
	// vals are the value differences v_B - v_A, over the range where some
	// rule has positive regret and a margin of two steps, widened to
	// diffs: the two are equal.
	vals []int
	// regret[j][k] is the regret of rule j (optimal table, greedy, offset
	// rule) at value difference vals[k].
	regret [3][]float64
}

// Rules of the regret panel, in the order of pairData.regret.
const (
	ruleOptimal = iota
	ruleGreedy
	ruleOffset
)

// pairReadings returns the range of reading differences r_B - r_A where
// both channels are alive (neither is certainly below the other), widened
// to every cell stored in the table of the pair.
func pairReadings(sol *result.Solution) (lo, hi int) {
	l := sol.Layout
	lo, hi = l.Lo[1]-l.Hi[0], l.Hi[1]-l.Lo[0]
	if t := sol.Tables.Table(tables.SetOf(0, 1)); t != nil {
		for _, c := range t.Cells {
			lo, hi = min(lo, c.Diff[1]), max(hi, c.Diff[1])
		}
	}
	return lo, hi
}

// pairValues returns the values vector of a value difference d = v_B -
// v_A, shifted so that its minimum is 0.
func pairValues(d int) []int {
	if d >= 0 {
		return []int{0, d}
	}
	return []int{-d, 0}
}

// newPairData computes the two-channel picture of sol.
func newPairData(sol *result.Solution) *pairData {
	l := sol.Layout
	rules := [3]tables.Rule{
		ruleOptimal: sol.Tables,
		ruleGreedy:  tables.Greedy{},
		ruleOffset:  tables.Offset{Half: sol.OffsetHalf},
	}
	// Beyond D plus the largest shift of a heuristic every rule picks the
	// better channel for sure (design notes, "Heuristics").
	reach := l.D + max(tables.OffsetWidth(sol.OffsetHalf), result.GreedyWidth(l)) + 1
	var all [3][]float64 // regret at value differences -reach..reach
	first, last := 0, 0
	for d := -reach; d <= reach; d++ {
		for j, r := range rules {
			x := l.Regret(r, pairValues(d))
			all[j] = append(all[j], x)
			if x > 0 {
				first, last = min(first, d), max(last, d)
			}
		}
	}

	// Both panels span the same differences: the table's cells with a
	// margin of forced cells, and the values where some rule has
	// positive regret with a margin of two steps.
	lo, hi := pairReadings(sol)
	margin := max(3, (hi-lo)/4)
	lo, hi = min(lo-margin, first-2), max(hi+margin, last+2)

	pd := &pairData{}
	p := make([]float64, 2)
	for d := lo; d <= hi; d++ {
		sol.Tables.Probs([]int{0, d}, p)
		pd.diffs = append(pd.diffs, d)
		pd.pick[0] = append(pd.pick[0], p[0])
		pd.pick[1] = append(pd.pick[1], p[1])
		pd.vals = append(pd.vals, d)
		for j := range rules {
			x := 0.0
			if k := d + reach; k >= 0 && k < len(all[j]) {
				x = all[j][k]
			}
			pd.regret[j] = append(pd.regret[j], x)
		}
	}
	return pd
}

// drawPair draws the two-channel picture of sol on dc, its text scaled
// by f.
func drawPair(sol *result.Solution, dc draw.Canvas, f vg.Length) error {
	m := sol.Model
	h := m.Step
	a, b := m.Channels[0].Name, m.Channels[1].Name
	pd := newPairData(sol)

	// Top panel: probability of picking each channel.
	top := newPlot(f)
	top.Title.Text = fmt.Sprintf("Optimal table: probability of picking %s or %s", a, b)
	top.X.Label.Text = axisLabel(fmt.Sprintf("r_%s - r_%s", b, a), m)
	top.Y.Label.Text = "probability of picking"
	top.Y.Min, top.Y.Max = -0.02, 1.02
	top.X.Min = (float64(pd.diffs[0]) - 0.5) * h
	top.X.Max = (float64(pd.diffs[len(pd.diffs)-1]) + 0.5) * h
	topLegend := newLegend(f)

	shade := &cellBand{color: shadeColor, step: h}
	for k, d := range pd.diffs {
		if p := pd.pick[0][k]; p > 0 && p < 1 {
			shade.at = append(shade.at, float64(d)*h)
		}
	}
	if len(shade.at) > 0 {
		top.Add(shade)
	}
	for i, name := range []string{a, b} {
		line, err := plotter.NewLine(stepPoints(pd.diffs, pd.pick[i], h))
		if err != nil {
			return fmt.Errorf("channel %q: %w", name, err)
		}
		line.Color = channelColors[i]
		line.Width = 2 * f
		if i == 1 {
			line.Dashes = []vg.Length{vg.Points(6), vg.Points(3)}
		}
		top.Add(line)
		topLegend.Add("pick "+name, line)
	}
	if len(shade.at) > 0 {
		topLegend.Add("randomized cell", shade)
	}

	// Bottom panel: regret of each rule against the value difference.
	bot := newPlot(f)
	bot.Title.Text = fmt.Sprintf("Regret of each rule, channels %s and %s", a, b)
	bot.X.Label.Text = axisLabel(fmt.Sprintf("v_%s - v_%s", b, a), m)
	bot.Y.Label.Text = axisLabel("regret", m)
	bot.Y.Min = 0
	botLegend := newLegend(f)

	lower, upper := units(sol.Lower, h), units(sol.Upper, h)
	xs := [2]float64{top.X.Min, top.X.Max}
	addBound := func(y float64, label string, dashes []vg.Length) error {
		line, err := plotter.NewLine(plotter.XYs{{X: xs[0], Y: y}, {X: xs[1], Y: y}})
		if err != nil {
			return fmt.Errorf("%s: %w", label, err)
		}
		line.Color = boundColor
		line.Width = vg.Points(1)
		line.Dashes = dashes
		bot.Add(line)
		botLegend.Add(label, line)
		return nil
	}
	if sameFigure(lower, upper) {
		if err := addBound(upper, "certified optimum "+withUnit(upper, m), []vg.Length{vg.Points(2), vg.Points(2)}); err != nil {
			return err
		}
	} else {
		if err := addBound(upper, "optimum at most "+withUnit(upper, m), []vg.Length{vg.Points(2), vg.Points(2)}); err != nil {
			return err
		}
		if err := addBound(lower, "optimum at least "+withUnit(lower, m), []vg.Length{vg.Points(6), vg.Points(2)}); err != nil {
			return err
		}
	}

	figures := [3]result.Figure{ruleOptimal: sol.Optimal, ruleGreedy: sol.Greedy, ruleOffset: sol.Offset}
	styles := [3]struct {
		name   string
		color  color.Color
		dashes []vg.Length
		glyph  draw.GlyphDrawer
	}{
		ruleOptimal: {"optimal table", optimalColor, nil, draw.CircleGlyph{}},
		ruleGreedy:  {"greedy", greedyColor, []vg.Length{vg.Points(5), vg.Points(3)}, draw.SquareGlyph{}},
		ruleOffset:  {"offset rule", offsetColor, []vg.Length{vg.Points(1.5), vg.Points(2.5)}, draw.TriangleGlyph{}},
	}
	for j, st := range styles {
		xy := make(plotter.XYs, len(pd.vals))
		for k, d := range pd.vals {
			xy[k] = plotter.XY{X: float64(d) * h, Y: pd.regret[j][k] * h}
		}
		line, pts, err := plotter.NewLinePoints(xy)
		if err != nil {
			return fmt.Errorf("%s: %w", st.name, err)
		}
		line.Color = st.color
		line.Width = 1.5 * f
		line.Dashes = st.dashes
		pts.Color = st.color
		pts.Shape = st.glyph
		pts.Radius = 2.5 * f
		bot.Add(line, pts)
		label := st.name
		if j == ruleOffset && allZero(sol.OffsetHalf) {
			label += " = greedy"
		}
		if fig := figures[j]; fig.Regret != nil {
			label += ", worst " + withUnit(units(fig.Regret, h), m)
		}
		botLegend.Add(label, line, pts)
	}
	bot.Y.Max = max(bot.Y.Max, upper) * 1.08
	// One scale for both panels: both show differences in reading units.
	bot.X.Min, bot.X.Max = top.X.Min, top.X.Max

	plots := [][]*gplot.Plot{{top}, {bot}}
	legends := []*gplot.Legend{&topLegend, &botLegend}
	return drawWithLegends(dc, plots, legends)
}

// sameFigure reports whether two figures in reading units agree to
// within round-off.
func sameFigure(x, y float64) bool {
	return math.Abs(x-y) <= 1e-9*math.Max(math.Abs(x), math.Abs(y))
}

// allZero reports whether every offset is zero: the offset rule is then
// the greedy rule.
func allZero(half []int) bool {
	for _, x := range half {
		if x != 0 {
			return false
		}
	}
	return true
}

// stepPoints returns the outline of a step function over lattice cells:
// the value ys[k] across the cell of width h centred on xs[k]*h.
func stepPoints(xs []int, ys []float64, h float64) plotter.XYs {
	out := make(plotter.XYs, 0, 2*len(xs))
	for k, x := range xs {
		c := float64(x) * h
		out = append(out, plotter.XY{X: c - h/2, Y: ys[k]}, plotter.XY{X: c + h/2, Y: ys[k]})
	}
	return out
}

// cellBand shades the full height of the data area over lattice cells of
// width step centred on the given abscissas.
type cellBand struct {
	at    []float64
	step  float64
	color color.Color
}

// Plot implements plot.Plotter.
func (s *cellBand) Plot(c draw.Canvas, plt *gplot.Plot) {
	tx, _ := plt.Transforms(&c)
	c.SetColor(s.color)
	for i := 0; i < len(s.at); {
		// Join adjacent cells into one rectangle.
		j := i
		for j+1 < len(s.at) && math.Abs(s.at[j+1]-s.at[j]-s.step) < 1e-9*s.step {
			j++
		}
		c.Fill(rect(tx(s.at[i]-s.step/2), c.Min.Y, tx(s.at[j]+s.step/2), c.Max.Y))
		i = j + 1
	}
}

// Thumbnail implements plot.Thumbnailer.
func (s *cellBand) Thumbnail(c *draw.Canvas) {
	c.SetColor(s.color)
	c.Fill(c.Rectangle.Path())
}

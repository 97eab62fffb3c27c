package plot

import (
	"fmt"
	"image/color"

	gplot "gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables"
	"github.com/pickwise/pickwise/tables/result"
)

// regionData is what the decision-region picture shows: the choice of the
// optimal table over a square of the plane of reading differences x = r_1
// - r_0 and y = r_2 - r_0 (channels 0, 1, 2; steps), every other channel
// reading far below.
type regionData struct {
	// (x0, y0) is the lower-left lattice point; the square has side
	// points on each axis.
	x0, y0, side int
	// p[(y-y0)*side + (x-x0)] holds the probability of picking channels
	// 0, 1 and 2 at lattice point (x, y).
	p [][3]float64
}

// at returns the probabilities at lattice point (x, y).
func (rd *regionData) at(x, y int) [3]float64 {
	return rd.p[(y-rd.y0)*rd.side+(x-rd.x0)]
}

// regionBounds returns the bounding box, in steps, of the cells of the
// table of the group of channels 0, 1 and 2, or of the reading differences
// that can join the three into one group when the table is empty.
func regionBounds(sol *result.Solution) (x0, x1, y0, y1 int) {
	t := sol.Tables.Table(tables.SetOf(0, 1, 2))
	if t == nil || len(t.Cells) == 0 {
		s := 2*sol.Layout.T + 1
		return -s, s, -s, s
	}
	x0, x1 = t.Cells[0].Diff[1], t.Cells[0].Diff[1]
	y0, y1 = t.Cells[0].Diff[2], t.Cells[0].Diff[2]
	for _, c := range t.Cells[1:] {
		x0, x1 = min(x0, c.Diff[1]), max(x1, c.Diff[1])
		y0, y1 = min(y0, c.Diff[2]), max(y1, c.Diff[2])
	}
	return x0, x1, y0, y1
}

// newRegionData computes the decision regions of sol: the bounding box of
// the three-channel table, widened to a square with a margin of forced
// cells on every side.
func newRegionData(sol *result.Solution) *regionData {
	x0, x1, y0, y1 := regionBounds(sol)
	w, h := x1-x0, y1-y0
	side := max(w, h)
	// Centre the shorter range in the square.
	x0 -= (side - w) / 2
	y0 -= (side - h) / 2
	margin := max(3, side/8)
	x0, y0 = x0-margin, y0-margin
	side += 2*margin + 1

	n := sol.Layout.N()
	rd := &regionData{x0: x0, y0: y0, side: side, p: make([][3]float64, side*side)}
	r := make([]int, n)
	for i := 3; i < n; i++ {
		r[i] = tables.Far
	}
	p := make([]float64, n)
	for y := y0; y < y0+side; y++ {
		for x := x0; x < x0+side; x++ {
			r[1], r[2] = x, y
			sol.Tables.Probs(r, p)
			rd.p[(y-y0)*side+(x-x0)] = [3]float64{p[0], p[1], p[2]}
		}
	}
	return rd
}

// cellColor returns the colour of a lattice cell with choice
// probabilities p and whether the cell is randomized.
func cellColor(p [3]float64) (color.RGBA, bool) {
	for i, x := range p {
		if x == 1 {
			return channelColors[i], false
		}
	}
	return blend(p[:]), true
}

// drawRegions draws the decision-region picture of sol on dc, its text
// scaled by f.
func drawRegions(sol *result.Solution, dc draw.Canvas, f vg.Length) error {
	m := sol.Model
	h := m.Step
	names := [3]string{m.Channels[0].Name, m.Channels[1].Name, m.Channels[2].Name}
	rd := newRegionData(sol)

	p := newPlot(f)
	p.Title.Text = fmt.Sprintf("Optimal table: decision regions of %s, %s and %s", names[0], names[1], names[2])
	if n := len(m.Channels); n > 3 {
		p.Title.Text += "\n" + farBelow(m.Channels[3:])
	}
	p.X.Label.Text = axisLabel(fmt.Sprintf("r_%s - r_%s", names[1], names[0]), m)
	p.Y.Label.Text = axisLabel(fmt.Sprintf("r_%s - r_%s", names[2], names[0]), m)
	p.X.Padding, p.Y.Padding = 0, 0
	lo := func(v int) float64 { return (float64(v) - 0.5) * h }
	p.X.Min, p.X.Max = lo(rd.x0), lo(rd.x0+rd.side)
	p.Y.Min, p.Y.Max = lo(rd.y0), lo(rd.y0+rd.side)

	grid := &cellGrid{data: rd, step: h}
	p.Add(grid)

	// Greedy's boundaries: the rays from the origin where two readings tie
	// and the third is lower.
	var greedy *plotter.Line
	for _, ray := range [3]plotter.XY{{X: 0, Y: -1}, {X: -1, Y: 0}, {X: 1, Y: 1}} {
		far := float64(rd.side) * h * 2
		line, err := plotter.NewLine(plotter.XYs{{X: 0, Y: 0}, {X: ray.X * far, Y: ray.Y * far}})
		if err != nil {
			return fmt.Errorf("greedy boundary: %w", err)
		}
		line.Color = tieColor
		line.Width = vg.Points(0.9)
		line.Dashes = []vg.Length{vg.Points(4), vg.Points(4)}
		p.Add(line)
		greedy = line
	}
	// The rays reach beyond the square; keep the axes on the cells.
	p.X.Min, p.X.Max = lo(rd.x0), lo(rd.x0+rd.side)
	p.Y.Min, p.Y.Max = lo(rd.y0), lo(rd.y0+rd.side)

	legend := newLegend(f)
	for i, name := range names {
		legend.Add("picks "+name, &swatch{fill: channelColors[i]})
	}
	legend.Add("randomized (blend)", &swatch{fill: blend([]float64{0.5, 0.5, 0}), mark: true})
	legend.Add("greedy boundary", greedy)

	return drawSquare(dc, p, &legend)
}

// farBelow returns the part of a title saying that the given channels
// read far below the three shown.
func farBelow(others []discretize.Channel) string {
	if len(others) > 3 {
		return fmt.Sprintf("the other %d channels far below", len(others))
	}
	names := make([]string, len(others))
	for i, c := range others {
		names[i] = c.Name
	}
	switch len(names) {
	case 1:
		return "other channel " + names[0] + " far below"
	case 2:
		return "other channels " + names[0] + " and " + names[1] + " far below"
	}
	return "other channels " + names[0] + ", " + names[1] + " and " + names[2] + " far below"
}

// cellGrid draws the lattice cells of a regionData: each cell a square of
// side step in its colour, randomized cells with a dark dot.
type cellGrid struct {
	data *regionData
	step float64
}

// Plot implements plot.Plotter.
func (g *cellGrid) Plot(c draw.Canvas, plt *gplot.Plot) {
	tx, ty := plt.Transforms(&c)
	rd, h := g.data, g.step
	edge := func(v int) float64 { return (float64(v) - 0.5) * h }
	// Each square reaches a point into the next one, which is drawn
	// later and covers the overlap: anti-aliased edges then leave no
	// light seams between squares of one colour (a point is more than a
	// pixel at any resolution of 72 dpi or more).
	const overlap = vg.Length(1)
	for y := rd.y0; y < rd.y0+rd.side; y++ {
		y0, y1 := ty(edge(y)), ty(edge(y+1))
		if y+1 < rd.y0+rd.side {
			y1 += overlap
		}
		for x := rd.x0; x < rd.x0+rd.side; {
			col, _ := cellColor(rd.at(x, y))
			e := x + 1
			for e < rd.x0+rd.side {
				if c2, _ := cellColor(rd.at(e, y)); c2 != col {
					break
				}
				e++
			}
			x0, x1 := tx(edge(x)), tx(edge(e))
			if e < rd.x0+rd.side {
				x1 += overlap
			}
			c.SetColor(col)
			c.Fill(rect(x0, y0, x1, y1))
			x = e
		}
	}
	cell := min(tx(h)-tx(0), ty(h)-ty(0))
	radius := min(max(cell*0.18, vg.Points(0.6)), vg.Points(3))
	dot := draw.GlyphStyle{Color: markColor, Radius: radius, Shape: draw.CircleGlyph{}}
	for y := rd.y0; y < rd.y0+rd.side; y++ {
		for x := rd.x0; x < rd.x0+rd.side; x++ {
			if _, mixed := cellColor(rd.at(x, y)); mixed {
				c.DrawGlyph(dot, vg.Point{X: tx(float64(x) * h), Y: ty(float64(y) * h)})
			}
		}
	}
}

// DataRange implements plot.DataRanger.
func (g *cellGrid) DataRange() (xmin, xmax, ymin, ymax float64) {
	rd, h := g.data, g.step
	return (float64(rd.x0) - 0.5) * h, (float64(rd.x0+rd.side) - 0.5) * h,
		(float64(rd.y0) - 0.5) * h, (float64(rd.y0+rd.side) - 0.5) * h
}

// swatch is a legend thumbnail: a filled square, with a dot for
// randomized cells.
type swatch struct {
	fill color.Color
	mark bool
}

// Thumbnail implements plot.Thumbnailer.
func (s *swatch) Thumbnail(c *draw.Canvas) {
	r := c.Rectangle
	side := min(r.Size().X, r.Size().Y)
	mid := c.Center()
	c.SetColor(s.fill)
	c.Fill(rect(mid.X-side/2, mid.Y-side/2, mid.X+side/2, mid.Y+side/2))
	if s.mark {
		dot := draw.GlyphStyle{Color: markColor, Radius: side * 0.18, Shape: draw.CircleGlyph{}}
		c.DrawGlyph(dot, mid)
	}
}

package plot

import (
	"fmt"

	gplot "gonum.org/v1/plot"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// pad is the space around and between the parts of a picture.
const pad = vg.Length(8)

// legendPlace says where the legends of a picture go: in a strip to the
// right of the plots, level with the top of each data area, or under each
// plot.
type legendPlace struct {
	below bool
	// w and h are the width and height of the largest legend.
	w, h vg.Length
}

// placeLegends styles the legends for a place on dc, beside or under the
// plots, shrinking their text if needed: a strip beside the plots takes
// at most half the width of dc, with the text at three quarters of its
// size or more; legends under the plots take the full width, with the
// text at half its size or more. It fails when the legends do not fit.
func placeLegends(dc draw.Canvas, below bool, legends ...*gplot.Legend) (legendPlace, error) {
	for _, lg := range legends {
		lg.Top, lg.Left = true, true
		lg.Padding = vg.Points(3)
	}
	size := func() (w, h vg.Length) {
		for _, lg := range legends {
			s := lg.Rectangle(dc).Size()
			w, h = max(w, s.X), max(h, s.Y)
		}
		return w, h
	}
	room, least := dc.Size().X/2-4*pad, vg.Length(0.75)
	if below {
		room, least = dc.Size().X-2*pad, 0.5
	}
	w, h := size()
	if w > room {
		if w*least > room {
			return legendPlace{}, fmt.Errorf("picture too narrow for its legend: %.0f points wide", dc.Size().X.Points())
		}
		for _, lg := range legends {
			f := room / w
			lg.TextStyle.Font.Size *= f
			lg.ThumbnailWidth *= f
			lg.Padding *= f
		}
		w, h = size()
	}
	return legendPlace{below: below, w: w, h: h}, nil
}

// fitText shrinks the font of sty so that txt is at most width wide.
func fitText(sty *text.Style, txt string, width vg.Length) {
	if w := sty.Rectangle(txt).Size().X; w > width && width > 0 {
		sty.Font.Size *= width / w
	}
}

// drawWithLegends draws a column of plots, aligned, each with its legend
// beside it when the legends fit in a strip to the right, under it
// otherwise.
func drawWithLegends(dc draw.Canvas, plots [][]*gplot.Plot, legends []*gplot.Legend) error {
	saved := make([]gplot.Legend, len(legends))
	for i, lg := range legends {
		saved[i] = *lg
	}
	lp, err := placeLegends(dc, false, legends...)
	if err != nil {
		for i, lg := range legends {
			*lg = saved[i]
		}
		if lp, err = placeLegends(dc, true, legends...); err != nil {
			return err
		}
	}
	area := draw.Crop(dc, pad, -pad, pad, -pad)
	if !lp.below {
		area = draw.Crop(dc, pad, -(lp.w + 3*pad), pad, -pad)
	}
	for _, row := range plots {
		fitText(&row[0].Title.TextStyle, row[0].Title.Text, area.Size().X)
	}
	tiles := draw.Tiles{Rows: len(plots), Cols: 1, PadY: 2 * pad}
	cs := gplot.Align(plots, tiles, area)
	for i, row := range plots {
		p, c := row[0], cs[i][0]
		if lp.below {
			c = draw.Crop(c, 0, 0, lp.h+pad, 0)
		}
		da := p.DataCanvas(c)
		if da.Size().X <= 0 || da.Size().Y <= 0 {
			return fmt.Errorf("picture too small for its plots and legends: %.0f by %.0f points", dc.Size().X.Points(), dc.Size().Y.Points())
		}
		p.Draw(c)
		var r vg.Rectangle
		if lp.below {
			r = vg.Rectangle{Min: vg.Point{X: da.Min.X, Y: cs[i][0].Min.Y}, Max: vg.Point{X: dc.Max.X - pad, Y: c.Min.Y - pad}}
		} else {
			r = vg.Rectangle{Min: vg.Point{X: da.Max.X + 2*pad, Y: da.Min.Y}, Max: vg.Point{X: dc.Max.X - pad, Y: da.Max.Y}}
		}
		legends[i].Draw(draw.Canvas{Canvas: dc.Canvas, Rectangle: r})
	}
	return nil
}

// drawSquare draws p on dc with a square data area, with its legend beside
// or under it, whichever leaves the larger square, and its title centred
// over the picture. The plot and legend are centred on dc.
func drawSquare(dc draw.Canvas, p *gplot.Plot, legend *gplot.Legend) error {
	// The title goes over the whole picture, not over the plot alone.
	title, tsty := p.Title.Text, p.Title.TextStyle
	p.Title.Text = ""
	fitText(&tsty, title, dc.Size().X-2*pad)
	body := draw.Crop(dc, pad, -pad, pad, -(2*pad + tsty.Height(title)))

	type option struct {
		legend gplot.Legend
		place  legendPlace
		side   vg.Length
		padW   vg.Length // width of the plot around its data area
		padH   vg.Length
	}
	var best *option
	for _, below := range []bool{false, true} {
		o := &option{legend: *legend}
		var err error
		if o.place, err = placeLegends(dc, below, &o.legend); err != nil {
			continue
		}
		avail := draw.Crop(body, 0, -(o.place.w + 2*pad), 0, 0)
		if below {
			avail = draw.Crop(body, 0, 0, o.place.h+pad, 0)
		}
		da := p.DataCanvas(avail)
		o.padW, o.padH = avail.Size().X-da.Size().X, avail.Size().Y-da.Size().Y
		o.side = min(avail.Size().X-o.padW, avail.Size().Y-o.padH)
		if o.side > 0 && (best == nil || o.side > best.side) {
			best = o
		}
	}
	if best == nil {
		return fmt.Errorf("picture too small for its axes and legend: %.0f by %.0f points", dc.Size().X.Points(), dc.Size().Y.Points())
	}
	*legend = best.legend

	// The group of plot and legend, centred in the body.
	w, h := best.side+best.padW, best.side+best.padH
	if best.place.below {
		h += pad + best.place.h
	} else {
		w += 2*pad + best.place.w
	}
	x0 := body.Min.X + (body.Size().X-w)/2
	y1 := body.Max.Y - (body.Size().Y-h)/2
	c := body
	c.Min.X, c.Max.X = x0, x0+best.side+best.padW
	c.Max.Y, c.Min.Y = y1, y1-(best.side+best.padH)
	p.Draw(c)

	da := p.DataCanvas(c)
	var r vg.Rectangle
	if best.place.below {
		r = vg.Rectangle{Min: vg.Point{X: da.Min.X, Y: dc.Min.Y + pad}, Max: vg.Point{X: dc.Max.X - pad, Y: c.Min.Y - pad}}
	} else {
		r = vg.Rectangle{Min: vg.Point{X: da.Max.X + 2*pad, Y: da.Min.Y}, Max: vg.Point{X: dc.Max.X - pad, Y: da.Max.Y}}
	}
	legend.Draw(draw.Canvas{Canvas: dc.Canvas, Rectangle: r})

	tsty.XAlign, tsty.YAlign = draw.XCenter, draw.YTop
	dc.FillText(tsty, vg.Point{X: (dc.Min.X + dc.Max.X) / 2, Y: dc.Max.Y - pad}, title)
	return nil
}

// textScale returns the factor applied to the text of a picture of the
// given size in pixels: 1 from 600 pixels on the shorter side, less below
// it, down to 0.6, so that small pictures keep room for their data.
func textScale(width, height int) vg.Length {
	return min(1, max(0.6, vg.Length(min(width, height))/600))
}

// newPlot returns a plot with its text and tick marks scaled by f.
func newPlot(f vg.Length) *gplot.Plot {
	p := gplot.New()
	p.Title.TextStyle.Font.Size *= f
	p.Title.Padding *= f
	for _, a := range []*gplot.Axis{&p.X, &p.Y} {
		a.Label.TextStyle.Font.Size *= f
		a.Label.Padding *= f
		a.Tick.Label.Font.Size *= f
		a.Tick.Length *= f
		a.Tick.Marker = ticks{}
	}
	return p
}

// newLegend returns a legend with its text scaled by f.
func newLegend(f vg.Length) gplot.Legend {
	lg := gplot.NewLegend()
	lg.TextStyle.Font.Size *= f
	lg.ThumbnailWidth *= f
	return lg
}

// rect returns the closed path of an axis-aligned rectangle.
func rect(x0, y0, x1, y1 vg.Length) vg.Path {
	var p vg.Path
	p.Move(vg.Point{X: x0, Y: y0})
	p.Line(vg.Point{X: x1, Y: y0})
	p.Line(vg.Point{X: x1, Y: y1})
	p.Line(vg.Point{X: x0, Y: y1})
	p.Close()
	return p
}

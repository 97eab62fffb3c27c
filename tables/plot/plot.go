// Package plot draws pictures of a solved pickwise model with gonum/plot.
//
// The picture depends on the number of channels. With two channels it has
// two panels: the probability that the optimal table picks each channel
// against the reading difference, and the regret of the optimal, greedy and
// offset rules against the true value difference, with the certified
// optimum as a reference line. With three or more channels it shows the
// decision regions of the first three channels over the plane of their
// reading differences, every other channel being far below.
//
// In every picture the channels keep the colours they have in the
// legends, randomized cells of a table are shaded or blended and marked,
// and axis labels carry the model's reading unit.
//
// Sizes are in pixels at 96 pixels per inch: a PNG has exactly the size
// asked, an SVG the same size in points (a pixel is 3/4 of a point). SVG
// output is deterministic: the same solution gives the same bytes. Its
// text names the Liberation Serif font (metrically the same as Times New
// Roman) without embedding it.
package plot

import (
	"bytes"
	"fmt"
	"image"
	"path/filepath"
	"strings"

	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
	"gonum.org/v1/plot/vg/vgsvg"

	"github.com/pickwise/pickwise/tables/result"
)

// Default picture size, in pixels.
const (
	DefaultWidth  = 960
	DefaultHeight = 720
)

// MaxSide is the largest width or height accepted, in pixels.
const MaxSide = 16384

// MinSide is the smallest width or height accepted, in pixels: below it
// the axes and legends leave too little room for the data.
const MinSide = 320

// MinPairHeight is the smallest height of a two-channel picture, in
// pixels: it stacks two plots, each with its legend.
const MinPairHeight = 400

// dpi is the resolution of PNG output.
const dpi = 96

// formats lists the picture formats, as FormatFor names them.
var formats = []string{"png", "svg"}

// Formats returns the names of the supported picture formats.
func Formats() []string { return append([]string(nil), formats...) }

// FormatFor returns the picture format named by the extension of path:
// "png" or "svg" (the case of the extension does not matter).
func FormatFor(path string) (string, error) {
	ext := strings.ToLower(strings.TrimPrefix(filepath.Ext(path), "."))
	for _, f := range formats {
		if ext == f {
			return f, nil
		}
	}
	if ext == "" {
		return "", fmt.Errorf("picture %q: no file extension: use .png or .svg", path)
	}
	return "", fmt.Errorf("picture %q: unknown format %q: use .png or .svg", path, ext)
}

// Write draws the picture of sol and writes it to path, in the format
// named by the extension of path (.png or .svg), width by height pixels.
// The file is written atomically: it never holds a partial picture.
func Write(sol *result.Solution, path string, width, height int) error {
	format, err := FormatFor(path)
	if err != nil {
		return err
	}
	data, err := Render(sol, format, width, height)
	if err != nil {
		return fmt.Errorf("picture %q: %w", path, err)
	}
	if err := result.WriteAtomic(path, data); err != nil {
		return fmt.Errorf("picture %q: %w", path, err)
	}
	return nil
}

// Render draws the picture of sol, width by height pixels, and returns it
// encoded in format: "png" or "svg". Width and height must be between
// MinSide and MaxSide, and the height of a two-channel picture at least
// MinPairHeight.
func Render(sol *result.Solution, format string, width, height int) ([]byte, error) {
	if err := checkSolution(sol); err != nil {
		return nil, err
	}
	if width < MinSide || height < MinSide || width > MaxSide || height > MaxSide {
		return nil, fmt.Errorf("size %dx%d pixels: width and height must be between %d and %d", width, height, MinSide, MaxSide)
	}
	if sol.Layout.N() == 2 && height < MinPairHeight {
		return nil, fmt.Errorf("size %dx%d pixels: a picture of two channels needs a height of at least %d", width, height, MinPairHeight)
	}
	var canvas vg.CanvasWriterTo
	switch format {
	case "png":
		img := image.NewRGBA(image.Rect(0, 0, width, height))
		c := vgimg.NewWith(vgimg.UseImage(img), vgimg.UseDPI(dpi))
		canvas = vgimg.PngCanvas{Canvas: c}
	case "svg":
		w := vg.Length(width) * vg.Inch / dpi
		h := vg.Length(height) * vg.Inch / dpi
		canvas = vgsvg.New(w, h)
	default:
		return nil, fmt.Errorf("unknown picture format %q: want png or svg", format)
	}
	dc := draw.New(canvas)
	var err error
	if sol.Layout.N() == 2 {
		err = drawPair(sol, dc, textScale(width, height))
	} else {
		err = drawRegions(sol, dc, textScale(width, height))
	}
	if err != nil {
		return nil, err
	}
	var buf bytes.Buffer
	if _, err := canvas.WriteTo(&buf); err != nil {
		return nil, fmt.Errorf("encoding %s: %w", format, err)
	}
	return buf.Bytes(), nil
}

// checkSolution reports whether sol has what the pictures need.
func checkSolution(sol *result.Solution) error {
	switch {
	case sol == nil:
		return fmt.Errorf("no solution to draw")
	case sol.Model == nil || sol.Layout == nil || sol.Tables == nil:
		return fmt.Errorf("solution lacks its model, layout or tables")
	case len(sol.Model.Channels) != sol.Layout.N():
		return fmt.Errorf("solution has %d channels in its model but %d in its layout", len(sol.Model.Channels), sol.Layout.N())
	case !(sol.Model.Step > 0):
		return fmt.Errorf("step %g is not positive", sol.Model.Step)
	case sol.Layout.N() < 2:
		return fmt.Errorf("need at least two channels, got %d", sol.Layout.N())
	case len(sol.OffsetHalf) != sol.Layout.N():
		return fmt.Errorf("solution has %d offsets for %d channels", len(sol.OffsetHalf), sol.Layout.N())
	case sol.Upper == nil || sol.Lower == nil:
		return fmt.Errorf("solution lacks its certificate bounds")
	}
	return nil
}

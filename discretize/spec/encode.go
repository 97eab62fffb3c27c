package spec

import (
	"bufio"
	"fmt"
	"io"
	"strconv"
	"strings"

	"github.com/pickwise/pickwise/discretize"
)

// samplesPerLine is the number of inline samples Encode writes per line.
const samplesPerLine = 8

// Encode writes the model as a TOML model file that Parse reads back to the
// same File. The output is self-contained: samples read from a file are
// written inline, with a comment naming the file. Optional fields are
// written only when the file set them, and numbers in the shortest form
// that reads back exactly.
func (f *File) Encode(w io.Writer) error {
	b := bufio.NewWriter(w)
	fmt.Fprintf(b, "step = %s\n", formatFloat(f.Step))
	if f.Unit != "" {
		fmt.Fprintf(b, "unit = %s\n", quote(f.Unit))
	}
	if f.TailSet {
		fmt.Fprintf(b, "tail = %s\n", formatFloat(f.Tail))
	}
	for i := range f.Channels {
		c := &f.Channels[i]
		b.WriteString("\n[[channel]]\n")
		if c.NameSet {
			fmt.Fprintf(b, "name = %s\n", quote(c.Name))
		}
		fmt.Fprintf(b, "noise = %s\n", quote(c.Kind))
		switch c.Kind {
		case discretize.KindNormal:
			fmt.Fprintf(b, "sigma = %s\n", formatFloat(c.Sigma))
		case discretize.KindLaplace, discretize.KindLogistic:
			fmt.Fprintf(b, "scale = %s\n", formatFloat(c.Scale))
		case discretize.KindUniform:
			fmt.Fprintf(b, "half_width = %s\n", formatFloat(c.HalfWidth))
		case discretize.KindStudent:
			fmt.Fprintf(b, "scale = %s\n", formatFloat(c.Scale))
			fmt.Fprintf(b, "df = %s\n", formatFloat(c.DF))
		case discretize.KindPMF:
			fmt.Fprintf(b, "values = %s\n", formatArray(c.Values, 0))
			fmt.Fprintf(b, "probs = %s\n", formatArray(c.Probs, 0))
		case discretize.KindSamples:
			if c.SamplesFile != "" {
				fmt.Fprintf(b, "# %d samples read from %s\n", len(c.Samples), quote(c.SamplesFile))
			}
			fmt.Fprintf(b, "samples = %s\n", formatArray(c.Samples, samplesPerLine))
		}
		if c.MeanSet {
			fmt.Fprintf(b, "mean = %s\n", formatFloat(c.Mean))
		}
	}
	return b.Flush()
}

// formatFloat writes x as a TOML float that reads back exactly.
func formatFloat(x float64) string {
	s := strconv.FormatFloat(x, 'g', -1, 64)
	switch s {
	case "NaN":
		return "nan"
	case "+Inf":
		return "inf"
	case "-Inf":
		return "-inf"
	}
	if !strings.ContainsAny(s, ".e") {
		s += ".0"
	}
	return s
}

// formatArray writes xs as a TOML array, perLine numbers to a line (all on
// one line when perLine is 0).
func formatArray(xs []float64, perLine int) string {
	var b strings.Builder
	b.WriteByte('[')
	multi := perLine > 0 && len(xs) > perLine
	for i, x := range xs {
		switch {
		case multi && i%perLine == 0:
			b.WriteString("\n  ")
		case i > 0:
			b.WriteByte(' ')
		}
		b.WriteString(formatFloat(x))
		if i < len(xs)-1 || multi {
			b.WriteByte(',')
		}
	}
	if multi {
		b.WriteByte('\n')
	}
	b.WriteByte(']')
	return b.String()
}

// quote writes s as a TOML basic string: quotes, backslashes and control
// characters are escaped, everything else is written as it is.
func quote(s string) string {
	var b strings.Builder
	b.WriteByte('"')
	for _, r := range s {
		switch {
		case r == '"':
			b.WriteString(`\"`)
		case r == '\\':
			b.WriteString(`\\`)
		case r == '\n':
			b.WriteString(`\n`)
		case r == '\t':
			b.WriteString(`\t`)
		case r < 0x20 || r == 0x7f:
			fmt.Fprintf(&b, `\u%04X`, r)
		default:
			b.WriteRune(r)
		}
	}
	b.WriteByte('"')
	return b.String()
}

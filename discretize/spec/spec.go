// Package spec reads and writes pickwise model files: TOML documents that
// give the lattice step and the noise of each channel, all in reading
// units.
//
// A model file looks like this:
//
//	step = 0.5          # lattice step of readings and values (> 0), required
//	unit = "dB"         # optional label of the reading unit
//	tail = 1e-9         # optional, default 1e-9; 0 < tail < 0.5
//
//	[[channel]]
//	name = "chain-1"    # optional, default ch1, ch2, ...; unique
//	noise = "normal"    # exact | pmf | normal | laplace | logistic | uniform | student | samples
//	sigma = 0.8
//	mean = 0.0          # optional bias of any continuous kind
//
// The fields of each noise kind:
//
//	exact     none
//	normal    sigma (standard deviation), mean
//	laplace   scale, mean
//	logistic  scale, mean
//	uniform   half_width, mean
//	student   scale, df, mean
//	pmf       values (multiples of step), probs
//	samples   file (measured errors, one per line) or samples = [...] inline
//
// A samples file holds one measured error (reading minus true value) per
// line. Blank lines and lines starting with # are skipped, so a header
// line must be commented out; a line with more than one comma-separated
// column is an error. The path is relative to the model file's directory.
//
// Every problem is reported as one *Error naming the file, the channel and
// the field.
package spec

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"strconv"

	"github.com/pickwise/pickwise/discretize"
)

// DefaultTail is the tail mass cut from continuous noise when the model
// file gives none.
const DefaultTail = 1e-9

// File is a model file as given. Optional fields carry a flag telling
// whether the file set them, so that Encode writes the model back as given.
type File struct {
	Source   string  // name of the file, used in messages
	Step     float64 // lattice step in reading units
	Unit     string  // label of the reading unit, may be empty
	Tail     float64 // tail mass cut from continuous noise
	TailSet  bool    // whether the file gives tail (else Tail is DefaultTail)
	Channels []ChannelSpec
}

// ChannelSpec is one [[channel]] table. Only the fields of its noise kind
// are meaningful; the others are zero.
type ChannelSpec struct {
	Name    string // unique name; ch1, ch2, ... by position when not given
	NameSet bool   // whether the file gives the name
	Kind    string // noise kind, one of discretize.Kinds

	Sigma     float64 // normal
	Scale     float64 // laplace, logistic, student
	HalfWidth float64 // uniform
	DF        float64 // student
	Mean      float64 // bias of a continuous kind
	MeanSet   bool    // whether the file gives mean

	Values []float64 // pmf: noise values, multiples of step
	Probs  []float64 // pmf: their probabilities

	SamplesFile string    // samples: the file as given, "" when inline
	Samples     []float64 // samples: the measured errors, loaded from SamplesFile when given
}

// given returns the name as the file gives it, "" when it gives none:
// messages name such a channel by its position.
func (c *ChannelSpec) given() string {
	if c.NameSet {
		return c.Name
	}
	return ""
}

// Noise returns the channel's noise in the form package discretize puts on
// the lattice.
func (c *ChannelSpec) Noise() discretize.Noise {
	switch c.Kind {
	case discretize.KindExact:
		return discretize.Exact{}
	case discretize.KindPMF:
		return discretize.Discrete{Values: c.Values, Probs: c.Probs}
	case discretize.KindNormal:
		return discretize.Normal{Sigma: c.Sigma, Mean: c.Mean}
	case discretize.KindLaplace:
		return discretize.Laplace{Scale: c.Scale, Mean: c.Mean}
	case discretize.KindLogistic:
		return discretize.Logistic{Scale: c.Scale, Mean: c.Mean}
	case discretize.KindUniform:
		return discretize.Uniform{HalfWidth: c.HalfWidth, Mean: c.Mean}
	case discretize.KindStudent:
		return discretize.Student{Scale: c.Scale, DF: c.DF, Mean: c.Mean}
	case discretize.KindSamples:
		return discretize.Samples{Errors: c.Samples}
	}
	return nil
}

// Error is a problem with a model file.
type Error struct {
	File    string // the model file
	Channel string // the channel's name as the file gives it, "" when it gives none
	Index   int    // the channel's position from 1, 0 when the problem is not in a channel
	Field   string // the key, "" when the problem is not with one key
	Msg     string
}

// Error formats the problem as
//
//	model.toml: channel "chain-2": field "sigma": must be > 0, got -1
//
// naming the channel by position (channel 2) when it has no name.
func (e *Error) Error() string {
	s := e.File
	add := func(part string) {
		if s != "" {
			s += ": "
		}
		s += part
	}
	switch {
	case e.Channel != "":
		add("channel " + strconv.Quote(e.Channel))
	case e.Index > 0:
		add("channel " + strconv.Itoa(e.Index))
	}
	if e.Field != "" {
		add("field " + strconv.Quote(e.Field))
	}
	add(e.Msg)
	return s
}

// Load reads the model file at path. Samples files are read relative to
// its directory; absolute paths and paths with .. are allowed.
func Load(path string) (*File, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, &Error{File: path, Msg: err.Error()}
	}
	return Parse(data, path, dirFS(filepath.Dir(path)))
}

// dirFS opens files relative to a directory of the operating system. Unlike
// os.DirFS it accepts absolute paths and paths leading out of the
// directory, as a model file may name any samples file its author can read.
type dirFS string

func (d dirFS) Open(name string) (fs.File, error) {
	p := filepath.FromSlash(name)
	if !filepath.IsAbs(p) {
		p = filepath.Join(string(d), p)
	}
	return os.Open(p)
}

// Parse reads a model file from data. name is used in messages. Samples
// files are opened in fsys, which may be nil when the model has none (an
// embed.FS holding a model and its samples works).
func Parse(data []byte, name string, fsys fs.FS) (*File, error) {
	p := parser{file: name, fsys: fsys}
	f, err := p.parse(data)
	if err != nil {
		return nil, err
	}
	return f, nil
}

// Discretize puts every channel's noise on the lattice.
func (f *File) Discretize() (*discretize.Model, error) {
	m := &discretize.Model{Step: f.Step, Unit: f.Unit, Tail: f.Tail, Channels: make([]discretize.Channel, len(f.Channels))}
	for i := range f.Channels {
		c := &f.Channels[i]
		n := c.Noise()
		if n == nil {
			return nil, &Error{File: f.Source, Channel: c.given(), Index: i + 1, Field: "noise", Msg: fmt.Sprintf("unknown noise %q", c.Kind)}
		}
		pmf, cut, err := n.Lattice(f.Step, f.Tail)
		if err != nil {
			return nil, paramError(f.Source, c, i, err)
		}
		m.Channels[i] = discretize.Channel{Name: c.Name, Kind: c.Kind, PMF: pmf, Cut: cut}
	}
	return m, nil
}

// paramError turns an error of package discretize about channel i into an
// *Error naming the field.
func paramError(file string, c *ChannelSpec, i int, err error) error {
	e := &Error{File: file, Channel: c.given(), Index: i + 1, Msg: err.Error()}
	var pe *discretize.ParamError
	if errors.As(err, &pe) {
		e.Field, e.Msg = pe.Param, pe.Msg
		if e.Field == "samples" && c.SamplesFile != "" {
			e.Field, e.Msg = "file", c.SamplesFile+": "+pe.Msg
		}
	}
	return e
}

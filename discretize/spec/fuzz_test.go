package spec

import (
	"bytes"
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"testing"
	"testing/fstest"
)

// FuzzParse checks that no input makes Parse panic, that every refusal is
// an *Error, and that every accepted model discretizes, encodes, and reads
// back to itself.
func FuzzParse(f *testing.F) {
	for _, path := range []string{
		filepath.Join("..", "..", "examples", "two-sensors.toml"),
		filepath.Join("testdata", "lab.toml"),
	} {
		data, err := os.ReadFile(path)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
	}
	for _, s := range []string{
		"step = 1\n[[channel]]\nnoise = \"exact\"\n[[channel]]\nnoise = \"normal\"\nsigma = 1\nmean = 0.5\n",
		"step = 0.5\ntail = 1e-3\nchannel = [{noise = \"laplace\", scale = 1}, {noise = \"logistic\", scale = 2}]\n",
		"step = 0.25\n[[channel]]\nnoise = \"uniform\"\nhalf_width = 1\n[[channel]]\nname = \"t\"\nnoise = \"student\"\nscale = 1\ndf = 3\n",
		"step = 1\n[[channel]]\nnoise = \"pmf\"\nvalues = [-1, 0, 1]\nprobs = [0.25, 0.5, 0.25]\n[[channel]]\nnoise = \"samples\"\nsamples = [1, 2, 3, 4, 5, 6, 7, 8, 9, 10]\n",
		"step = 1\n[[channel]]\nnoise = \"samples\"\nfile = \"e.csv\"\n[[channel]]\nnoise = \"exact\"\n",
		"step = -1\n[[channel]]\nnoise = \"gauss\"\n",
		"step = 1\n[channel]\nname = 3\n",
		"step = 1e-300\n[[channel]]\nnoise = \"normal\"\nsigma = 1e300\n[[channel]]\nnoise = \"exact\"\n",
		"",
	} {
		f.Add([]byte(s))
	}
	files := fstest.MapFS{"e.csv": {Data: []byte(samplesCSV)}}
	f.Fuzz(func(t *testing.T, data []byte) {
		file, err := Parse(data, "fuzz.toml", files)
		if err != nil {
			var e *Error
			if !errors.As(err, &e) || e.Msg == "" || e.File != "fuzz.toml" {
				t.Fatalf("refusal %T %q is not a complete *Error", err, err)
			}
			return
		}
		m, err := file.Discretize()
		if err != nil {
			t.Fatalf("accepted model does not discretize: %v", err)
		}
		for _, c := range m.Channels {
			if err := c.PMF.Check(); err != nil {
				t.Fatalf("channel %q: %v", c.Name, err)
			}
		}
		var buf bytes.Buffer
		if err := file.Encode(&buf); err != nil {
			t.Fatal(err)
		}
		again, err := Parse(buf.Bytes(), "fuzz.toml", nil)
		if err != nil {
			t.Fatalf("encoded model does not parse: %v\n%s", err, buf.Bytes())
		}
		for i := range file.Channels {
			file.Channels[i].SamplesFile = ""
		}
		if !reflect.DeepEqual(file, again) {
			t.Fatalf("round trip changed the model:\n%+v\n%+v\n%s", file, again, buf.Bytes())
		}
	})
}

package spec

import (
	"bytes"
	"embed"
	"errors"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"testing/fstest"

	"github.com/pickwise/pickwise/discretize"
)

//go:embed testdata
var testdata embed.FS

// samplesCSV is a valid samples file of ten errors.
const samplesCSV = "0.1\n0.2\n-0.3\n0\n0.5\n-0.5\n1\n0.25\n-0.1\n0.3\n"

// twoExact is a valid pair of channels appended to top-level test cases.
const twoExact = "\n[[channel]]\nnoise = \"exact\"\n[[channel]]\nnoise = \"exact\"\n"

// TestBadInput checks that each kind of bad model file is refused with one
// *Error naming the channel and the field.
func TestBadInput(t *testing.T) {
	files := fstest.MapFS{
		"ok.csv":      {Data: []byte(samplesCSV)},
		"few.csv":     {Data: []byte("# three\n1\n2\n3\n")},
		"word.csv":    {Data: []byte("# errors\n0.1\n0.2\nabc\n0.3\n")},
		"header.csv":  {Data: []byte("error\n0.1\n0.2\n0.3\n")},
		"two.csv":     {Data: []byte("0.1\n0.2,0.3\n")},
		"nan.csv":     {Data: []byte("0.1\n0.2\nNaN\n")},
		"huge.csv":    {Data: []byte("0.1\n1e999\n")},
		"spread.csv":  {Data: []byte(samplesCSV + "3e6\n")},
		"sub/dir.csv": {Data: []byte(samplesCSV)},
	}
	// ch wraps a channel table body into a valid model with a second,
	// exact channel after it.
	ch := func(body string) string {
		return "step = 0.5\n[[channel]]\n" + body + "\n[[channel]]\nnoise = \"exact\"\n"
	}
	cases := []struct {
		name    string
		toml    string
		channel string // how the message names the channel, "" for none
		field   string
		msg     string // part of the message
	}{
		// The top level.
		{"syntax", "step = \n" + twoExact, "", "", "line 1:"},
		{"step missing", "unit = \"dB\"\n" + twoExact, "", "step", "missing"},
		{"step string", "step = \"1\"\n" + twoExact, "", "step", "must be a number, got string"},
		{"step boolean", "step = true\n" + twoExact, "", "step", "got boolean"},
		{"step negative", "step = -1\n" + twoExact, "", "step", "must be > 0, got -1"},
		{"step zero", "step = 0.0\n" + twoExact, "", "step", "must be > 0, got 0"},
		{"step NaN", "step = nan\n" + twoExact, "", "step", "finite number > 0, got NaN"},
		{"step Inf", "step = inf\n" + twoExact, "", "step", "got +Inf"},
		{"unknown top key", "step = 1\nsteps = 2\n" + twoExact, "", "steps", "unknown key"},
		{"top key in wrong case", "step = 1\nUnit = \"dB\"\n" + twoExact, "", "Unit", `did you mean "unit"?`},
		{"unit number", "step = 1\nunit = 3\n" + twoExact, "", "unit", "must be a string, got integer"},
		{"tail zero", "step = 1\ntail = 0\n" + twoExact, "", "tail", "must be > 0 and < 0.5, got 0"},
		{"tail half", "step = 1\ntail = 0.5\n" + twoExact, "", "tail", "got 0.5"},
		{"tail string", "step = 1\ntail = \"small\"\n" + twoExact, "", "tail", "must be a number"},
		{"no channels", "step = 1\n", "", "channel", "missing"},
		{"one channel", "step = 1\n[[channel]]\nnoise = \"exact\"\n", "", "channel", "need at least two channels, got 1"},
		{"channel number", "step = 1\nchannel = 3\n", "", "channel", "must be an array of tables"},
		{"channel table", "step = 1\n[channel]\nnoise = \"exact\"\n", "", "channel", "got table"},
		{"channel array of numbers", "step = 1\nchannel = [1, 2]\n", "", "channel", "entry 1 must be a table, got integer"},

		// Keys and kinds.
		{"noise missing", ch("sigma = 1"), "channel 1", "noise", "missing (one of exact, pmf, normal"},
		{"noise unknown", ch("noise = \"gauss\""), "channel 1", "noise", `unknown noise "gauss" (valid: exact, pmf, normal, laplace, logistic, uniform, student, samples)`},
		{"noise number", ch("noise = 1"), "channel 1", "noise", "must be a string, got integer"},
		{"unknown key", ch("name = \"a\"\nnoise = \"normal\"\nsigma = 1\nsigmaa = 2"), `channel "a"`, "sigmaa", "unknown key"},
		{"key in wrong case", ch("noise = \"normal\"\nSigma = 1"), "channel 1", "Sigma", `did you mean "sigma"?`},
		{"key with dash", ch("noise = \"uniform\"\nhalf-width = 1"), "channel 1", "half-width", `did you mean "half_width"?`},
		{"sigma on pmf", ch("noise = \"pmf\"\nvalues = [0]\nprobs = [1]\nsigma = 1"), "channel 1", "sigma", `does not apply to noise "pmf" (its fields: values, probs)`},
		{"mean on exact", ch("noise = \"exact\"\nmean = 0.1"), "channel 1", "mean", "(its fields: none)"},
		{"df on normal", ch("noise = \"normal\"\nsigma = 1\ndf = 3"), "channel 1", "df", `does not apply to noise "normal"`},
		{"mean on samples", ch("noise = \"samples\"\nfile = \"ok.csv\"\nmean = 1"), "channel 1", "mean", "does not apply"},

		// Continuous kinds.
		{"sigma missing", ch("noise = \"normal\"\nmean = 1"), "channel 1", "sigma", `missing (noise "normal" needs sigma)`},
		{"sigma negative", ch("name = \"chain-2\"\nnoise = \"normal\"\nsigma = -1"), `channel "chain-2"`, "sigma", "must be > 0, got -1"},
		{"sigma string", ch("noise = \"normal\"\nsigma = \"0.8\""), "channel 1", "sigma", "must be a number, got string"},
		{"sigma Inf", ch("noise = \"normal\"\nsigma = inf"), "channel 1", "sigma", "finite"},
		{"sigma too wide", ch("noise = \"normal\"\nsigma = 1e6"), "channel 1", "sigma", "lattice points, more than 1000000"},
		{"mean Inf", ch("noise = \"normal\"\nsigma = 1\nmean = -inf"), "channel 1", "mean", "must be a finite number, got -Inf"},
		{"mean array", ch("noise = \"normal\"\nsigma = 1\nmean = [1]"), "channel 1", "mean", "must be a number, got array"},
		{"mean far", ch("noise = \"normal\"\nsigma = 1\nmean = 1e12"), "channel 1", "mean", "steps from zero"},
		{"laplace scale zero", ch("noise = \"laplace\"\nscale = 0"), "channel 1", "scale", "must be > 0, got 0"},
		{"logistic scale missing", ch("noise = \"logistic\""), "channel 1", "scale", "missing"},
		{"uniform half width NaN", ch("noise = \"uniform\"\nhalf_width = nan"), "channel 1", "half_width", "got NaN"},
		{"student df missing", ch("noise = \"student\"\nscale = 1"), "channel 1", "df", `missing (noise "student" needs scale, df)`},
		{"student df zero", ch("noise = \"student\"\nscale = 1\ndf = 0"), "channel 1", "df", "must be > 0, got 0"},
		{"student df negative", ch("noise = \"student\"\nscale = 1\ndf = -3"), "channel 1", "df", "must be > 0, got -3"},
		{"student df huge", ch("noise = \"student\"\nscale = 1\ndf = 1e6"), "channel 1", "df", "at most 1000"},

		// Pmf.
		{"values missing", ch("noise = \"pmf\"\nprobs = [1]"), "channel 1", "values", "missing"},
		{"probs missing", ch("noise = \"pmf\"\nvalues = [0]"), "channel 1", "probs", "missing"},
		{"values number", ch("noise = \"pmf\"\nvalues = 0\nprobs = [1]"), "channel 1", "values", "must be an array of numbers, got integer"},
		{"values string entry", ch("noise = \"pmf\"\nvalues = [0, \"1\"]\nprobs = [0.5, 0.5]"), "channel 1", "values", "entry 2 must be a number, got string"},
		{"values off lattice", ch("name = \"b\"\nnoise = \"pmf\"\nvalues = [0, 0.5, 0.7]\nprobs = [0.5, 0.25, 0.25]"), `channel "b"`, "values", "entry 3: 0.7 is not a multiple of step 0.5"},
		{"values repeat", ch("noise = \"pmf\"\nvalues = [0, 0.5, 0.5]\nprobs = [0.5, 0.25, 0.25]"), "channel 1", "values", "entry 3 (0.5) is the lattice point of entry 2"},
		{"values empty", ch("noise = \"pmf\"\nvalues = []\nprobs = []"), "channel 1", "values", "is empty"},
		{"probs negative", ch("noise = \"pmf\"\nvalues = [0, 0.5]\nprobs = [1.5, -0.5]"), "channel 1", "probs", "entry 2 is -0.5"},
		{"probs NaN", ch("noise = \"pmf\"\nvalues = [0, 0.5]\nprobs = [nan, 1]"), "channel 1", "probs", "entry 1 is NaN"},
		{"probs sum", ch("noise = \"pmf\"\nvalues = [0, 0.5]\nprobs = [0.5, 0.6]"), "channel 1", "probs", "sum to 1.1, want 1"},
		{"probs length", ch("noise = \"pmf\"\nvalues = [0, 0.5]\nprobs = [1]"), "channel 1", "probs", "has 1 entries but values has 2"},

		// Names.
		{"name duplicate", "step = 1\n[[channel]]\nname = \"a\"\nnoise = \"exact\"\n[[channel]]\nname = \"a\"\nnoise = \"exact\"\n", `channel "a"`, "name", `"a" is already the name of channel 1`},
		{"name takes a default", "step = 1\n[[channel]]\nnoise = \"exact\"\n[[channel]]\nname = \"ch1\"\nnoise = \"exact\"\n", `channel "ch1"`, "name", "already the name of channel 1"},
		{"default name taken", "step = 1\n[[channel]]\nname = \"ch2\"\nnoise = \"exact\"\n[[channel]]\nnoise = \"exact\"\n", "channel 2", "name", `the default name "ch2" is taken by channel 1`},
		{"name empty", ch("name = \"\"\nnoise = \"exact\""), "channel 1", "name", "must not be empty"},
		{"name number", ch("name = 7\nnoise = \"exact\""), "channel 1", "name", "must be a string, got integer"},
		{"name control", ch("name = \"a\\nb\"\nnoise = \"exact\""), "channel 1", "name", "control characters"},

		// Samples.
		{"samples file missing", ch("noise = \"samples\"\nfile = \"nope.csv\""), "channel 1", "file", "cannot read samples file"},
		{"samples file and inline", ch("noise = \"samples\"\nfile = \"ok.csv\"\nsamples = [1]"), "channel 1", "samples", "either file or samples, not both"},
		{"samples neither", ch("noise = \"samples\""), "channel 1", "file", "missing"},
		{"samples file number", ch("noise = \"samples\"\nfile = 3"), "channel 1", "file", "must be a string, got integer"},
		{"samples file few", ch("name = \"m\"\nnoise = \"samples\"\nfile = \"few.csv\""), `channel "m"`, "file", "few.csv: has 3 numbers, need at least 10"},
		{"samples file word", ch("noise = \"samples\"\nfile = \"word.csv\""), "channel 1", "file", `word.csv: line 4: "abc" is not a number`},
		{"samples file header", ch("noise = \"samples\"\nfile = \"header.csv\""), "channel 1", "file", `line 1: "error" is not a number (start a header line with #)`},
		{"samples file columns", ch("noise = \"samples\"\nfile = \"two.csv\""), "channel 1", "file", "line 2: 2 comma-separated columns"},
		{"samples file NaN", ch("noise = \"samples\"\nfile = \"nan.csv\""), "channel 1", "file", `line 3: "NaN" is not a finite number`},
		{"samples file overflow", ch("noise = \"samples\"\nfile = \"huge.csv\""), "channel 1", "file", `line 2: "1e999" is not a finite number`},
		{"samples file spread", ch("noise = \"samples\"\nfile = \"spread.csv\""), "channel 1", "file", "spread.csv: span 6000002 lattice points"},
		{"samples file outside", ch("noise = \"samples\"\nfile = \"../ok.csv\""), "channel 1", "file", "cannot read"},
		{"samples inline few", ch("noise = \"samples\"\nsamples = [1, 2]"), "channel 1", "samples", "has 2 numbers, need at least 10"},
		{"samples inline boolean", ch("noise = \"samples\"\nsamples = [1, true]"), "channel 1", "samples", "entry 2 must be a number, got boolean"},
		{"samples inline NaN", ch("noise = \"samples\"\nsamples = [1, 2, 3, 4, 5, 6, 7, 8, 9, nan]"), "channel 1", "samples", "entry 10 is NaN"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			f, err := Parse([]byte(c.toml), "model.toml", files)
			if err == nil {
				t.Fatalf("parsed %+v, want an error", f)
			}
			var e *Error
			if !errors.As(err, &e) {
				t.Fatalf("got %T %v, want *Error", err, err)
			}
			if e.File != "model.toml" || e.Field != c.field {
				t.Errorf("file %q field %q, want model.toml and %q (%v)", e.File, e.Field, c.field, err)
			}
			msg := err.Error()
			prefix := "model.toml: "
			if c.channel != "" {
				prefix += c.channel + ": "
			}
			if c.field != "" {
				prefix += `field "` + c.field + `": `
			}
			if !strings.HasPrefix(msg, prefix) || !strings.Contains(msg, c.msg) {
				t.Errorf("message %q\nwant prefix %q and %q in it", msg, prefix, c.msg)
			}
		})
	}
}

// TestErrorFormat checks the message format of the brief's example.
func TestErrorFormat(t *testing.T) {
	_, err := Parse([]byte(`step = 0.5
[[channel]]
name = "chain-1"
noise = "exact"
[[channel]]
name = "chain-2"
noise = "normal"
sigma = -1
`), "model.toml", nil)
	want := `model.toml: channel "chain-2": field "sigma": must be > 0, got -1`
	if err == nil || err.Error() != want {
		t.Errorf("got %v, want %s", err, want)
	}
}

// TestExample checks examples/two-sensors.toml and its discretization
// against package discretize directly.
func TestExample(t *testing.T) {
	f, err := Load(filepath.Join("..", "..", "examples", "two-sensors.toml"))
	if err != nil {
		t.Fatal(err)
	}
	if f.Step != 0.1 || f.Unit != "degC" || f.Tail != 1e-9 || !f.TailSet || len(f.Channels) != 2 {
		t.Fatalf("file %+v", f)
	}
	m, err := f.Discretize()
	if err != nil {
		t.Fatal(err)
	}
	if m.Step != 0.1 || m.Unit != "degC" || m.Tail != 1e-9 || m.N() != 2 {
		t.Fatalf("model %+v", m)
	}
	pt, ntc := m.Channels[0], m.Channels[1]
	if pt.Name != "probe-pt100" || pt.Kind != "normal" || ntc.Name != "probe-ntc" || ntc.Kind != "pmf" {
		t.Errorf("channels %q %q, %q %q", pt.Name, pt.Kind, ntc.Name, ntc.Kind)
	}
	want, cut, err := discretize.Normal{Sigma: 0.15}.Lattice(0.1, 1e-9)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(pt.PMF, want) || pt.Cut != cut {
		t.Errorf("normal channel differs from discretize.Normal")
	}
	// The skewed pmf sits on -2..3 steps with the given probabilities, to
	// the quantization grain.
	probs := []float64{0.05, 0.15, 0.40, 0.20, 0.12, 0.08}
	if ntc.PMF.Lo != -2 || ntc.PMF.Hi() != 3 || ntc.Cut != 0 {
		t.Fatalf("pmf channel on [%d, %d], cut %v", ntc.PMF.Lo, ntc.PMF.Hi(), ntc.Cut)
	}
	for i, p := range probs {
		if got := ntc.PMF.Prob(i - 2); math.Abs(got-p) > 4*math.Ldexp(1, -discretize.DenomBits) {
			t.Errorf("p(%d) = %v, want %v", i-2, got, p)
		}
	}
	for _, c := range m.Channels {
		if err := c.PMF.Check(); err != nil {
			t.Errorf("channel %q: %v", c.Name, err)
		}
	}
}

// TestDefaults checks the optional fields and integer numbers.
func TestDefaults(t *testing.T) {
	f, err := Parse([]byte(`step = 1
channel = [{noise = "exact"}, {noise = "student", scale = 2, df = 3}]
`), "inline.toml", nil)
	if err != nil {
		t.Fatal(err)
	}
	want := &File{
		Source: "inline.toml", Step: 1, Tail: DefaultTail,
		Channels: []ChannelSpec{
			{Name: "ch1", Kind: "exact"},
			{Name: "ch2", Kind: "student", Scale: 2, DF: 3},
		},
	}
	if !reflect.DeepEqual(f, want) {
		t.Errorf("got %+v\nwant %+v", f, want)
	}
}

// TestSamplesFile checks a samples file with comments, blank lines, a byte
// order mark and CRLF line ends, and its histogram: 16 errors at step 0.5
// whose rounded counts (worked out by hand) are exact dyadic fractions.
func TestSamplesFile(t *testing.T) {
	data := []byte("\ufeff# error\r\n-0.8\r\n-0.3\r\n0.1\r\n\r\n0.0\n0.2\n-0.2\n  0.4  \n0.6\n0.9\n1.3\n-0.1\n0.3,\n")
	// "0.3," is a second, empty column: refused.
	files := fstest.MapFS{"e.csv": {Data: data}}
	model := []byte("step = 0.5\n[[channel]]\nnoise = \"exact\"\n[[channel]]\nnoise = \"samples\"\nfile = \"e.csv\"\n")
	if _, err := Parse(model, "m.toml", files); err == nil || !strings.Contains(err.Error(), "line 14: 2 comma-separated columns") {
		t.Errorf("got %v, want a column error on line 14", err)
	}
	files["e.csv"] = &fstest.MapFile{Data: bytes.Replace(data, []byte("0.3,\n"), []byte("0.3\n0.24\n-0.26\n0.74\n1.8"), 1)}
	f, err := Parse(model, "m.toml", files)
	if err != nil {
		t.Fatal(err)
	}
	c := f.Channels[1]
	if c.SamplesFile != "e.csv" || len(c.Samples) != 16 || c.Samples[0] != -0.8 || c.Samples[15] != 1.8 {
		t.Fatalf("samples %q %v", c.SamplesFile, c.Samples)
	}
	m, err := f.Discretize()
	if err != nil {
		t.Fatal(err)
	}
	// -0.8 -> -2; -0.3, -0.26 -> -1; 0.1, 0, 0.2, -0.2, -0.1, 0.24 -> 0;
	// 0.4, 0.6, 0.3, 0.74 -> 1; 0.9 -> 2; 1.3 -> 3; 1.8 -> 4.
	counts := []uint64{1, 2, 6, 4, 1, 1, 1}
	p := m.Channels[1].PMF
	if p.Lo != -2 || len(p.Num) != len(counts) {
		t.Fatalf("pmf Lo %d Num %v", p.Lo, p.Num)
	}
	for i, n := range counts {
		if p.Num[i] != n*discretize.Denom/16 {
			t.Errorf("Num[%d] = %d, want %d/16 of 2^52", i, p.Num[i], n)
		}
	}
}

// TestLoadPaths checks that Load reads samples files relative to the model
// file, including paths that leave its directory.
func TestLoadPaths(t *testing.T) {
	dir := t.TempDir()
	for _, d := range []string{"models", "data"} {
		if err := os.Mkdir(filepath.Join(dir, d), 0o755); err != nil {
			t.Fatal(err)
		}
	}
	if err := os.WriteFile(filepath.Join(dir, "data", "e.csv"), []byte(samplesCSV), 0o644); err != nil {
		t.Fatal(err)
	}
	abs := filepath.ToSlash(filepath.Join(dir, "data", "e.csv"))
	for _, file := range []string{"../data/e.csv", abs} {
		model := "step = 0.5\n[[channel]]\nnoise = \"exact\"\n[[channel]]\nnoise = \"samples\"\nfile = " + quote(file) + "\n"
		path := filepath.Join(dir, "models", "m.toml")
		if err := os.WriteFile(path, []byte(model), 0o644); err != nil {
			t.Fatal(err)
		}
		f, err := Load(path)
		if err != nil {
			t.Fatalf("file %q: %v", file, err)
		}
		if got := len(f.Channels[1].Samples); got != 10 {
			t.Errorf("file %q: %d samples, want 10", file, got)
		}
	}
	if _, err := Load(filepath.Join(dir, "none.toml")); err == nil || !strings.HasPrefix(err.Error(), filepath.Join(dir, "none.toml")+": ") {
		t.Errorf("missing model: got %v", err)
	}
}

// TestEmbedded checks that a model and its samples file embedded in the
// binary parse through an fs.FS, and that Load on disk gives the same.
func TestEmbedded(t *testing.T) {
	sub, err := fs.Sub(testdata, "testdata")
	if err != nil {
		t.Fatal(err)
	}
	data, err := fs.ReadFile(sub, "lab.toml")
	if err != nil {
		t.Fatal(err)
	}
	f, err := Parse(data, "lab.toml", sub)
	if err != nil {
		t.Fatal(err)
	}
	g, err := Load(filepath.Join("testdata", "lab.toml"))
	if err != nil {
		t.Fatal(err)
	}
	g.Source = f.Source
	if !reflect.DeepEqual(f, g) {
		t.Errorf("embedded %+v\non disk %+v", f, g)
	}
	if c := f.Channels[1]; c.Name != "measured" || len(c.Samples) != 16 {
		t.Errorf("channel %+v", c)
	}
}

// roundTrip encodes f, parses the result and checks that it reads back to
// f, samples now inline.
func roundTrip(t *testing.T, f *File) []byte {
	t.Helper()
	var buf bytes.Buffer
	if err := f.Encode(&buf); err != nil {
		t.Fatal(err)
	}
	g, err := Parse(buf.Bytes(), f.Source, nil)
	if err != nil {
		t.Fatalf("encoded model does not parse: %v\n%s", err, buf.Bytes())
	}
	want := *f
	want.Channels = slicesClone(f.Channels)
	for i := range want.Channels {
		want.Channels[i].SamplesFile = ""
	}
	if !reflect.DeepEqual(g, &want) {
		t.Errorf("round trip changed the model:\n%+v\n%+v\n%s", g, &want, buf.Bytes())
	}
	return buf.Bytes()
}

func slicesClone(cs []ChannelSpec) []ChannelSpec { return append([]ChannelSpec(nil), cs...) }

// TestEncode checks the written form of the example model and that every
// kind reads back unchanged.
func TestEncode(t *testing.T) {
	f, err := Load(filepath.Join("..", "..", "examples", "two-sensors.toml"))
	if err != nil {
		t.Fatal(err)
	}
	got := string(roundTrip(t, f))
	want := `step = 0.1
unit = "degC"
tail = 1e-09

[[channel]]
name = "probe-pt100"
noise = "normal"
sigma = 0.15

[[channel]]
name = "probe-ntc"
noise = "pmf"
values = [-0.2, -0.1, 0.0, 0.1, 0.2, 0.3]
probs = [0.05, 0.15, 0.4, 0.2, 0.12, 0.08]
`
	if got != want {
		t.Errorf("encoded:\n%s\nwant:\n%s", got, want)
	}

	all := `step = 0.25
unit = "a \"quoted\" \\ unit"
[[channel]]
noise = "exact"
[[channel]]
name = "n"
noise = "normal"
sigma = 1
mean = -0.0
[[channel]]
noise = "laplace"
scale = 2.5e-3
[[channel]]
noise = "logistic"
scale = 1e-20
mean = 3
[[channel]]
noise = "uniform"
half_width = 0.3
[[channel]]
name = "t"
noise = "student"
scale = 0.1
df = 2
mean = 0.125
[[channel]]
noise = "pmf"
values = [0, 0.25]
probs = [0.3, 0.7]
[[channel]]
name = "s"
noise = "samples"
samples = [1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16, 17]
[[channel]]
name = "from file"
noise = "samples"
file = "lab/errors.csv"
`
	sub, err := fs.Sub(testdata, "testdata")
	if err != nil {
		t.Fatal(err)
	}
	files := fstest.MapFS{"lab/errors.csv": {Data: mustRead(t, sub, "errors.csv")}}
	f, err = Parse([]byte(all), "all.toml", files)
	if err != nil {
		t.Fatal(err)
	}
	out := string(roundTrip(t, f))
	for _, s := range []string{"# 16 samples read from \"lab/errors.csv\"\nsamples = [\n  -0.8,", "scale = 1e-20\n", "mean = -0.0\n", "sigma = 1.0\n"} {
		if !strings.Contains(out, s) {
			t.Errorf("encoded model lacks %q:\n%s", s, out)
		}
	}
}

func mustRead(t *testing.T, fsys fs.FS, name string) []byte {
	t.Helper()
	data, err := fs.ReadFile(fsys, name)
	if err != nil {
		t.Fatal(err)
	}
	return data
}

package spec

import (
	"errors"
	"fmt"
	"io/fs"
	"math"
	"slices"
	"strings"
	"time"
	"unicode"

	"github.com/BurntSushi/toml"

	"github.com/pickwise/pickwise/discretize"
)

// topKeys returns the keys of the top level.
func topKeys() []string { return []string{"step", "unit", "tail", "channel"} }

// channelKeys returns the keys every channel may have.
func channelKeys() []string { return []string{"name", "noise"} }

// kindKeys returns the keys that belong to a noise kind besides name and
// noise; for samples, file and samples are alternatives.
func kindKeys(kind string) []string {
	switch kind {
	case discretize.KindNormal:
		return []string{"sigma", "mean"}
	case discretize.KindLaplace, discretize.KindLogistic:
		return []string{"scale", "mean"}
	case discretize.KindUniform:
		return []string{"half_width", "mean"}
	case discretize.KindStudent:
		return []string{"scale", "df", "mean"}
	case discretize.KindPMF:
		return []string{"values", "probs"}
	case discretize.KindSamples:
		return []string{"file", "samples"}
	}
	return nil
}

// allChannelKeys returns every key a channel may have, in a fixed order.
func allChannelKeys() []string {
	keys := channelKeys()
	for _, k := range discretize.Kinds() {
		for _, key := range kindKeys(k) {
			if !slices.Contains(keys, key) {
				keys = append(keys, key)
			}
		}
	}
	return keys
}

// parser holds the context of one Parse call.
type parser struct {
	file string
	fsys fs.FS
}

// fail returns an *Error about the top level.
func (p *parser) fail(field, format string, args ...any) error {
	return &Error{File: p.file, Field: field, Msg: fmt.Sprintf(format, args...)}
}

func (p *parser) parse(data []byte) (*File, error) {
	var raw map[string]any
	if _, err := toml.Decode(string(data), &raw); err != nil {
		var pe toml.ParseError
		if errors.As(err, &pe) {
			return nil, p.fail("", "line %d: %s", pe.Position.Line, pe.Message)
		}
		return nil, p.fail("", "%v", err)
	}
	for _, key := range sortedKeys(raw) {
		if top := topKeys(); !slices.Contains(top, key) {
			return nil, p.fail(key, "unknown key%s (the top level has %s)", suggest(key, top), strings.Join(top, ", "))
		}
	}
	f := &File{Source: p.file, Tail: DefaultTail}

	step, ok, err := number(raw, "step")
	if err != nil {
		return nil, p.fail("step", "%v", err)
	}
	if !ok {
		return nil, p.fail("step", "missing (required: the lattice step in reading units)")
	}
	if err := positive(step); err != nil {
		return nil, p.fail("step", "%v", err)
	}
	f.Step = step

	if v, ok := raw["unit"]; ok {
		s, isString := v.(string)
		if !isString {
			return nil, p.fail("unit", "must be a string, got %s", typeName(v))
		}
		f.Unit = s
	}

	tail, ok, err := number(raw, "tail")
	if err != nil {
		return nil, p.fail("tail", "%v", err)
	}
	if ok {
		if !(tail > 0 && tail < 0.5) {
			return nil, p.fail("tail", "must be > 0 and < 0.5, got %v", tail)
		}
		f.Tail, f.TailSet = tail, true
	}

	tables, err := p.channelTables(raw)
	if err != nil {
		return nil, err
	}
	f.Channels = make([]ChannelSpec, len(tables))
	for i, t := range tables {
		if err := p.channel(f, i, t); err != nil {
			return nil, err
		}
	}
	return f, nil
}

// channelTables returns the [[channel]] tables, at least two.
func (p *parser) channelTables(raw map[string]any) ([]map[string]any, error) {
	v, ok := raw["channel"]
	if !ok {
		return nil, p.fail("channel", "missing: give at least two [[channel]] tables")
	}
	var tables []map[string]any
	switch v := v.(type) {
	case []map[string]any:
		tables = v
	case []any: // an inline array of inline tables
		for i, e := range v {
			t, ok := e.(map[string]any)
			if !ok {
				return nil, p.fail("channel", "entry %d must be a table, got %s", i+1, typeName(e))
			}
			tables = append(tables, t)
		}
	default:
		return nil, p.fail("channel", "must be an array of tables ([[channel]]), got %s", typeName(v))
	}
	if len(tables) < 2 {
		return nil, p.fail("channel", "need at least two channels, got %d", len(tables))
	}
	return tables, nil
}

// channel reads channel i from its table into f.Channels[i].
func (p *parser) channel(f *File, i int, t map[string]any) error {
	c := &f.Channels[i]
	fail := func(field, format string, args ...any) error {
		return &Error{File: p.file, Channel: c.given(), Index: i + 1, Field: field, Msg: fmt.Sprintf(format, args...)}
	}

	// The name first, so that later messages can use it.
	c.Name = fmt.Sprintf("ch%d", i+1)
	if v, ok := t["name"]; ok {
		c.Name = ""
		s, isString := v.(string)
		switch {
		case !isString:
			return fail("name", "must be a string, got %s", typeName(v))
		case s == "":
			return fail("name", "must not be empty")
		case strings.IndexFunc(s, unicode.IsControl) >= 0:
			return fail("name", "must not contain control characters, got %q", s)
		}
		c.Name, c.NameSet = s, true
	}
	for j := range i {
		if prev := &f.Channels[j]; prev.Name == c.Name {
			if !c.NameSet {
				return fail("name", "missing, and the default name %q is taken by channel %d; give each channel a name", c.Name, j+1)
			}
			return fail("name", "%q is already the name of channel %d", c.Name, j+1)
		}
	}

	all := allChannelKeys()
	for _, key := range sortedKeys(t) {
		if !slices.Contains(all, key) {
			return fail(key, "unknown key%s (a channel has %s)", suggest(key, all), strings.Join(all, ", "))
		}
	}

	v, ok := t["noise"]
	if !ok {
		return fail("noise", "missing (one of %s)", strings.Join(discretize.Kinds(), ", "))
	}
	kind, isString := v.(string)
	if !isString {
		return fail("noise", "must be a string, got %s", typeName(v))
	}
	if !slices.Contains(discretize.Kinds(), kind) {
		return fail("noise", "unknown noise %q (valid: %s)", kind, strings.Join(discretize.Kinds(), ", "))
	}
	c.Kind = kind

	own := kindKeys(kind)
	for _, key := range sortedKeys(t) {
		if !slices.Contains(channelKeys(), key) && !slices.Contains(own, key) {
			fields := "none"
			if len(own) > 0 {
				fields = strings.Join(own, ", ")
			}
			return fail(key, "does not apply to noise %q (its fields: %s)", kind, fields)
		}
	}

	// Numbers of the continuous kinds; required unless noted.
	num := func(key string, dst *float64, required bool) (bool, error) {
		x, ok, err := number(t, key)
		if err != nil {
			return false, fail(key, "%v", err)
		}
		if !ok && required {
			return false, fail(key, "missing (noise %q needs %s)", kind, strings.Join(requiredKeys(kind), ", "))
		}
		*dst = x
		return ok, nil
	}
	var err error
	switch kind {
	case discretize.KindNormal:
		_, err = num("sigma", &c.Sigma, true)
	case discretize.KindLaplace, discretize.KindLogistic:
		_, err = num("scale", &c.Scale, true)
	case discretize.KindUniform:
		_, err = num("half_width", &c.HalfWidth, true)
	case discretize.KindStudent:
		if _, err = num("scale", &c.Scale, true); err == nil {
			_, err = num("df", &c.DF, true)
		}
	case discretize.KindPMF:
		err = p.pmf(t, c, fail)
	case discretize.KindSamples:
		err = p.samples(t, c, fail)
	}
	if err != nil {
		return err
	}
	if slices.Contains(own, "mean") {
		if c.MeanSet, err = num("mean", &c.Mean, false); err != nil {
			return err
		}
	}
	if err := c.Noise().Check(f.Step, f.Tail); err != nil {
		return paramError(p.file, c, i, err)
	}
	return nil
}

// requiredKeys returns the keys a noise kind cannot do without.
func requiredKeys(kind string) []string {
	keys := kindKeys(kind)
	return slices.DeleteFunc(slices.Clone(keys), func(k string) bool { return k == "mean" })
}

// pmf reads the values and probabilities of a pmf channel.
func (p *parser) pmf(t map[string]any, c *ChannelSpec, fail func(string, string, ...any) error) error {
	for _, key := range []string{"values", "probs"} {
		xs, ok, err := numbers(t, key)
		if err != nil {
			return fail(key, "%v", err)
		}
		if !ok {
			return fail(key, "missing (noise \"pmf\" needs values and probs)")
		}
		if key == "values" {
			c.Values = xs
		} else {
			c.Probs = xs
		}
	}
	return nil
}

// samples reads the measured errors of a samples channel, inline or from
// its file.
func (p *parser) samples(t map[string]any, c *ChannelSpec, fail func(string, string, ...any) error) error {
	_, hasFile := t["file"]
	_, hasInline := t["samples"]
	switch {
	case hasFile && hasInline:
		return fail("samples", "give either file or samples, not both")
	case hasInline:
		xs, _, err := numbers(t, "samples")
		if err != nil {
			return fail("samples", "%v", err)
		}
		c.Samples = xs
		return nil
	case !hasFile:
		return fail("file", "missing (noise \"samples\" needs file = \"...\" or samples = [...])")
	}
	name, ok := t["file"].(string)
	if !ok {
		return fail("file", "must be a string, got %s", typeName(t["file"]))
	}
	if name == "" {
		return fail("file", "must not be empty")
	}
	c.SamplesFile = name
	xs, err := readSamples(p.fsys, name)
	if err != nil {
		return fail("file", "%v", err)
	}
	c.Samples = xs
	return nil
}

// number returns the number at key, an integer or a float.
func number(t map[string]any, key string) (x float64, ok bool, err error) {
	v, ok := t[key]
	if !ok {
		return 0, false, nil
	}
	switch v := v.(type) {
	case float64:
		return v, true, nil
	case int64:
		return float64(v), true, nil
	}
	return 0, true, fmt.Errorf("must be a number, got %s", typeName(v))
}

// numbers returns the array of numbers at key.
func numbers(t map[string]any, key string) (xs []float64, ok bool, err error) {
	v, ok := t[key]
	if !ok {
		return nil, false, nil
	}
	a, isArray := v.([]any)
	if !isArray {
		return nil, true, fmt.Errorf("must be an array of numbers, got %s", typeName(v))
	}
	xs = make([]float64, len(a))
	for i, e := range a {
		switch e := e.(type) {
		case float64:
			xs[i] = e
		case int64:
			xs[i] = float64(e)
		default:
			return nil, true, fmt.Errorf("entry %d must be a number, got %s", i+1, typeName(e))
		}
	}
	return xs, true, nil
}

// positive validates a number that must be finite and positive.
func positive(x float64) error {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return fmt.Errorf("must be a finite number > 0, got %v", x)
	}
	if x <= 0 {
		return fmt.Errorf("must be > 0, got %v", x)
	}
	return nil
}

// typeName names the TOML type of a decoded value.
func typeName(v any) string {
	switch v.(type) {
	case string:
		return "string"
	case int64:
		return "integer"
	case float64:
		return "float"
	case bool:
		return "boolean"
	case time.Time:
		return "datetime"
	case []any, []map[string]any:
		return "array"
	case map[string]any:
		return "table"
	}
	return fmt.Sprintf("%T", v)
}

// sortedKeys returns the keys of t in sorted order.
func sortedKeys(t map[string]any) []string {
	keys := make([]string, 0, len(t))
	for k := range t {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	return keys
}

// suggest returns a hint naming a known key that differs from key only in
// case or in - for _.
func suggest(key string, known []string) string {
	norm := func(s string) string { return strings.ReplaceAll(strings.ToLower(s), "-", "_") }
	for _, k := range known {
		if norm(k) == norm(key) {
			return fmt.Sprintf("; did you mean %q?", k)
		}
	}
	return ""
}

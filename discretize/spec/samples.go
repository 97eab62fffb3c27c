package spec

import (
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"strconv"
	"strings"

	"github.com/pickwise/pickwise/discretize"
)

// maxSamplesBytes bounds the size of a samples file read into memory.
const maxSamplesBytes = 256 << 20

// readSamples reads a samples file: one number per line; blank lines and
// lines starting with # are skipped. Lines are numbered from 1 in messages.
func readSamples(fsys fs.FS, name string) ([]float64, error) {
	if fsys == nil {
		return nil, fmt.Errorf("cannot read %s: no file system to read samples files from", name)
	}
	fh, err := fsys.Open(name)
	if err != nil {
		return nil, fmt.Errorf("cannot read samples file: %w", err)
	}
	defer fh.Close()
	data, err := io.ReadAll(io.LimitReader(fh, maxSamplesBytes+1))
	if err != nil {
		return nil, fmt.Errorf("cannot read samples file %s: %w", name, err)
	}
	if len(data) > maxSamplesBytes {
		return nil, fmt.Errorf("%s is larger than %d bytes", name, maxSamplesBytes)
	}
	xs, err := parseSamples(string(data))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	return xs, nil
}

// parseSamples parses the text of a samples file.
func parseSamples(text string) ([]float64, error) {
	text = strings.TrimPrefix(text, "\ufeff") // a byte order mark
	var xs []float64
	firstData := true
	for i, line := range strings.Split(text, "\n") {
		line = strings.TrimSpace(line)
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		if cols := strings.Split(line, ","); len(cols) > 1 {
			return nil, fmt.Errorf("line %d: %d comma-separated columns, want one number per line", i+1, len(cols))
		}
		x, err := strconv.ParseFloat(line, 64)
		if err != nil && !errors.Is(err, strconv.ErrRange) {
			hint := ""
			if firstData {
				hint = " (start a header line with #)"
			}
			return nil, fmt.Errorf("line %d: %q is not a number%s", i+1, line, hint)
		}
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return nil, fmt.Errorf("line %d: %q is not a finite number", i+1, line)
		}
		xs = append(xs, x)
		firstData = false
	}
	if len(xs) < discretize.MinSamples {
		return nil, fmt.Errorf("has %d numbers, need at least %d", len(xs), discretize.MinSamples)
	}
	return xs, nil
}

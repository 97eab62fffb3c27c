package plot

import (
	"bytes"
	"encoding/xml"
	"errors"
	"image"
	"image/color"
	"image/png"
	"io"
	"math/big"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables/result"
)

// pictureCases are the models drawn by the rendering tests.
var pictureCases = []struct {
	name     string
	model    func(*testing.T) *discretize.Model
	texts    []string // texts the picture must show
	notTexts []string // texts it must not show
}{
	{
		name:  "two channels",
		model: func(t *testing.T) *discretize.Model { return coinModel(t, 0.25) },
		texts: []string{"r_B - r_A (dB)", "v_B - v_A (dB)", "regret (dB)", "pick A", "pick B",
			"certified optimum 0.25 dB", "greedy, worst 0.375 dB"},
	},
	{
		name:     "three channels",
		model:    triModel,
		texts:    []string{"r_B - r_A (dB)", "r_C - r_A (dB)", "picks A", "picks B", "picks C", "greedy boundary"},
		notTexts: []string{"far below"},
	},
	{
		name:  "four channels",
		model: quadModel,
		texts: []string{"r_east - r_north (mV)", "r_south - r_north (mV)", "picks north", "other channel west far below"},
	},
}

func TestRenderPNG(t *testing.T) {
	// The default size, odd sizes, tall and wide ones, and the smallest
	// accepted for every picture.
	sizes := []struct{ w, h int }{{DefaultWidth, DefaultHeight}, {641, 479}, {400, 900}, {1500, 500}, {320, 400}}
	for _, tc := range pictureCases {
		t.Run(tc.name, func(t *testing.T) {
			sol := solve(t, tc.model(t))
			for _, sz := range sizes {
				data, err := Render(sol, "png", sz.w, sz.h)
				if err != nil {
					t.Fatalf("%dx%d: %v", sz.w, sz.h, err)
				}
				img, err := png.Decode(bytes.NewReader(data))
				if err != nil {
					t.Fatalf("%dx%d: decoding with image/png: %v", sz.w, sz.h, err)
				}
				if b := img.Bounds(); b != image.Rect(0, 0, sz.w, sz.h) {
					t.Errorf("size %v, asked %dx%d", b, sz.w, sz.h)
				}
				colors := countColors(img)
				if len(colors) < 4 {
					t.Errorf("%dx%d: %d distinct colours, want at least 4", sz.w, sz.h, len(colors))
				}
				// Lines and forced cells are drawn in the pure colour
				// of their channel.
				for i := range 2 + min(sol.Layout.N()-2, 1) {
					if colors[channelColors[i]] == 0 {
						t.Errorf("%dx%d: no pixel in the colour of channel %d", sz.w, sz.h, i)
					}
				}
			}
		})
	}
}

// countColors returns the number of pixels of each colour of img.
func countColors(img image.Image) map[color.RGBA]int {
	out := map[color.RGBA]int{}
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			out[color.RGBAModel.Convert(img.At(x, y)).(color.RGBA)]++
		}
	}
	return out
}

func TestRenderSVG(t *testing.T) {
	for _, tc := range pictureCases {
		t.Run(tc.name, func(t *testing.T) {
			sol := solve(t, tc.model(t))
			data, err := Render(sol, "svg", 800, 600)
			if err != nil {
				t.Fatal(err)
			}
			// Parse with encoding/xml to the end, gathering the text.
			dec := xml.NewDecoder(bytes.NewReader(data))
			var text strings.Builder
			var width string
			for {
				tok, err := dec.Token()
				if errors.Is(err, io.EOF) {
					break
				}
				if err != nil {
					t.Fatalf("SVG does not parse as XML: %v", err)
				}
				switch tok := tok.(type) {
				case xml.StartElement:
					if tok.Name.Local == "svg" {
						for _, a := range tok.Attr {
							if a.Name.Local == "width" {
								width = a.Value
							}
						}
					}
				case xml.CharData:
					text.Write(tok)
					text.WriteByte('\n')
				}
			}
			// 800 pixels at 96 per inch are 600 points.
			if width != "600pt" {
				t.Errorf("width %q, want 600pt", width)
			}
			for _, s := range tc.texts {
				if !strings.Contains(text.String(), s) {
					t.Errorf("text %q missing", s)
				}
			}
			for _, s := range tc.notTexts {
				if strings.Contains(text.String(), s) {
					t.Errorf("text %q present", s)
				}
			}

			// Deterministic: a second rendering, from a fresh solve,
			// gives the same bytes.
			again, err := Render(solve(t, tc.model(t)), "svg", 800, 600)
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.Equal(data, again) {
				t.Errorf("two renderings differ (%d and %d bytes)", len(data), len(again))
			}
		})
	}
}

func TestWrite(t *testing.T) {
	sol := solve(t, coinModel(t, 0.5))
	dir := t.TempDir()
	for _, name := range []string{"pair.png", "pair.SVG"} {
		path := filepath.Join(dir, name)
		if err := Write(sol, path, 500, 400); err != nil {
			t.Fatal(err)
		}
		data, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		format, _ := FormatFor(path)
		want, err := Render(sol, format, 500, 400)
		if err != nil {
			t.Fatal(err)
		}
		if format == "svg" && !bytes.Equal(data, want) {
			t.Errorf("%s differs from Render's bytes", name)
		}
		if format == "png" {
			cfg, err := png.DecodeConfig(bytes.NewReader(data))
			if err != nil || cfg.Width != 500 || cfg.Height != 400 {
				t.Errorf("%s: %dx%d, %v", name, cfg.Width, cfg.Height, err)
			}
		}
	}
	// A failed write leaves nothing behind.
	if err := Write(sol, filepath.Join(dir, "pair.gif"), 500, 400); err == nil {
		t.Error("writing a .gif succeeded")
	}
	if err := Write(sol, filepath.Join(dir, "small.png"), 10, 10); err == nil {
		t.Error("writing a 10x10 picture succeeded")
	}
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, e := range entries {
		names = append(names, e.Name())
	}
	if got := strings.Join(names, " "); got != "pair.SVG pair.png" {
		t.Errorf("directory holds %q, want the two pictures only", got)
	}
}

func TestRenderErrors(t *testing.T) {
	sol := solve(t, coinModel(t, 0.5))
	noTables := *sol
	noTables.Tables = nil
	cases := []struct {
		name   string
		sol    *result.Solution
		format string
		w, h   int
		want   string
	}{
		{"nil solution", nil, "png", 500, 400, "no solution"},
		{"no tables", &noTables, "png", 500, 400, "lacks"},
		{"unknown format", sol, "gif", 500, 400, "unknown picture format"},
		{"zero width", sol, "png", 0, 400, "size"},
		{"negative height", sol, "svg", 500, -1, "size"},
		{"too large", sol, "png", MaxSide + 1, 400, "size"},
		{"two channels too low", sol, "png", 500, 399, "height of at least 400"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Render(tc.sol, tc.format, tc.w, tc.h)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("error %v, want one containing %q", err, tc.want)
			}
		})
	}
}

func TestFormatFor(t *testing.T) {
	cases := []struct {
		path, want string
		ok         bool
	}{
		{"out/pair.png", "png", true},
		{"PAIR.SVG", "svg", true},
		{"pair.pdf", "", false},
		{"pair", "", false},
		{"dir.png/pair", "", false},
	}
	for _, tc := range cases {
		got, err := FormatFor(tc.path)
		if (err == nil) != tc.ok || got != tc.want {
			t.Errorf("FormatFor(%q) = %q, %v", tc.path, got, err)
		}
	}
}

// The picture drawn from a result file read back equals the picture drawn
// from the solve itself: the file carries everything the picture shows.
func TestRenderFromFile(t *testing.T) {
	for _, tc := range pictureCases {
		t.Run(tc.name, func(t *testing.T) {
			sol := solve(t, tc.model(t))
			var buf bytes.Buffer
			if err := result.NewFile(sol, "").Encode(&buf); err != nil {
				t.Fatal(err)
			}
			f, err := result.Decode(buf.Bytes(), "result.json")
			if err != nil {
				t.Fatal(err)
			}
			back, err := f.Solution()
			if err != nil {
				t.Fatal(err)
			}
			want, err := Render(sol, "svg", 640, 480)
			if err != nil {
				t.Fatal(err)
			}
			got, err := Render(back, "svg", 640, 480)
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.Equal(got, want) {
				t.Errorf("the picture from the file differs from the picture from the solve (%d and %d bytes)", len(got), len(want))
			}
		})
	}
}

// When the certificate's bounds do not meet, the regret panel shows both
// instead of one certified optimum.
func TestRenderBoundsApart(t *testing.T) {
	sol := solve(t, coinModel(t, 0.25))
	apart := *sol
	apart.Lower = new(big.Rat).Mul(sol.Upper, big.NewRat(9, 10))
	for _, tc := range []struct {
		name       string
		sol        *result.Solution
		has, lacks []string
	}{
		{"bounds meet", sol, []string{"certified optimum 0.25 dB"}, []string{"optimum at least"}},
		{"bounds apart", &apart, []string{"optimum at most 0.25 dB", "optimum at least 0.225 dB"}, []string{"certified optimum"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			data, err := Render(tc.sol, "svg", 800, 600)
			if err != nil {
				t.Fatal(err)
			}
			for _, s := range tc.has {
				if !bytes.Contains(data, []byte(">"+s+"<")) {
					t.Errorf("text %q missing", s)
				}
			}
			for _, s := range tc.lacks {
				if bytes.Contains(data, []byte(s)) {
					t.Errorf("text %q present", s)
				}
			}
		})
	}
}

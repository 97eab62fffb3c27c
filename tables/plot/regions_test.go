package plot

import (
	"math"
	"testing"

	"github.com/pickwise/pickwise/discretize"
	"github.com/pickwise/pickwise/tables"
)

func TestRegionData(t *testing.T) {
	cases := []struct {
		name  string
		model func(*testing.T) *discretize.Model
	}{
		{"three channels", triModel},
		{"four channels", quadModel},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			sol := solve(t, tc.model(t))
			rd := newRegionData(sol)
			last := rd.side - 1
			for k, p := range rd.p {
				s := p[0] + p[1] + p[2]
				if math.Abs(s-1) > 1e-12 || p[0] < 0 || p[1] < 0 || p[2] < 0 {
					t.Fatalf("cell %d: probabilities %v", k, p)
				}
			}
			// Every cell of the table of the three channels lies in the
			// square with a margin, and every randomized one is drawn as
			// randomized.
			tab := sol.Tables.Table(tables.SetOf(0, 1, 2))
			randomized := 0
			for _, c := range tab.Cells {
				x, y := c.Diff[1], c.Diff[2]
				if x < rd.x0+3 || x > rd.x0+last-3 || y < rd.y0+3 || y > rd.y0+last-3 {
					t.Fatalf("cell (%d, %d) outside the square from (%d, %d), side %d, with its margin", x, y, rd.x0, rd.y0, rd.side)
				}
				mixed := false
				for _, p := range c.P {
					mixed = mixed || p > 0 && p < 1
				}
				if _, drawn := cellColor(rd.at(x, y)); drawn != mixed {
					t.Errorf("cell (%d, %d) with probabilities %v drawn randomized: %v", x, y, c.P, drawn)
				}
				if mixed {
					randomized++
				}
			}
			t.Logf("%d cells in the table of the three channels, %d randomized", len(tab.Cells), randomized)
			// At the corners the choice is forced: far left and below,
			// channels 1 and 2 are certainly below channel 0; far
			// right, 0 and 2 are certainly below 1; far up, 0 and 1
			// below 2 (design notes, "certainly below").
			corners := []struct {
				x, y, ch int
			}{
				{rd.x0, rd.y0, 0},
				{rd.x0 + last, rd.y0, 1},
				{rd.x0, rd.y0 + last, 2},
			}
			for _, c := range corners {
				if col, mixed := cellColor(rd.at(c.x, c.y)); mixed || col != channelColors[c.ch] {
					t.Errorf("corner (%d, %d): probabilities %v, want channel %d", c.x, c.y, rd.at(c.x, c.y), c.ch)
				}
			}
		})
	}
}

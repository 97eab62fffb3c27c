package plot

import (
	"strings"
	"testing"
)

func TestTicks(t *testing.T) {
	cases := []struct {
		lo, hi float64
		want   []string // labels, in order
	}{
		{-1.875, 1.875, []string{"-1.5", "-1.0", "-0.5", "0.0", "0.5", "1.0", "1.5"}},
		{-0.02, 1.02, []string{"0.0", "0.2", "0.4", "0.6", "0.8", "1.0"}},
		{-42.5, 42.5, []string{"-40", "-30", "-20", "-10", "0", "10", "20", "30", "40"}},
		{0, 0.38, []string{"0.00", "0.05", "0.10", "0.15", "0.20", "0.25", "0.30", "0.35"}},
	}
	for _, tc := range cases {
		var got []string
		for _, tk := range (ticks{}).Ticks(tc.lo, tc.hi) {
			if tk.Value < tc.lo-1e-9 || tk.Value > tc.hi+1e-9 {
				t.Errorf("[%g, %g]: tick %g outside", tc.lo, tc.hi, tk.Value)
			}
			if tk.Label != "" {
				got = append(got, tk.Label)
			}
		}
		if strings.Join(got, " ") != strings.Join(tc.want, " ") {
			t.Errorf("[%g, %g]: labels %q, want %q", tc.lo, tc.hi, got, tc.want)
		}
	}
}

package report

import (
	"math"
	"slices"
	"testing"
)

func TestNiceTicks(t *testing.T) {
	tests := []struct {
		lo, hi    float64
		wantMajor []string
	}{
		{0, 18.48, []string{"0", "5", "10", "15"}},
		{-250, 500, []string{"-200", "0", "200", "400"}},
		{0, 1.2, []string{"0.0", "0.2", "0.4", "0.6", "0.8", "1.0", "1.2"}},
		{-0.45, 0.45, []string{"-0.4", "-0.2", "0.0", "0.2", "0.4"}},
		{0.001, 0.0012, []string{"0.00100", "0.00105", "0.00110", "0.00115", "0.00120"}},
		{1, 1, nil},
		{math.Inf(-1), 1, nil},
	}
	for _, tc := range tests {
		var got []string
		for _, tk := range (niceTicks{}).Ticks(tc.lo, tc.hi) {
			if tk.Label != "" {
				got = append(got, tk.Label)
			}
			if tk.Value < tc.lo-1e-9 || tk.Value > tc.hi+1e-9 {
				t.Errorf("[%g, %g]: tick %g outside the range", tc.lo, tc.hi, tk.Value)
			}
		}
		if !slices.Equal(got, tc.wantMajor) {
			t.Errorf("[%g, %g]: labels %v, want %v", tc.lo, tc.hi, got, tc.wantMajor)
		}
	}
}

func TestNiceStep(t *testing.T) {
	tests := []struct{ raw, want float64 }{
		{3, 5}, {1, 1}, {0.13, 0.2}, {7, 10}, {0.0004, 0.0005}, {0, 1}, {-1, 1},
	}
	for _, tc := range tests {
		if got := niceStep(tc.raw); math.Abs(got-tc.want) > 1e-12 {
			t.Errorf("niceStep(%g) = %g, want %g", tc.raw, got, tc.want)
		}
	}
}

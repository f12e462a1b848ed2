package report

import (
	"math"
	"slices"
	"strings"
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

func TestLogTicks(t *testing.T) {
	labels := func(lo, hi float64) []string {
		var out []string
		for _, tk := range (logTicks{}).Ticks(lo, hi) {
			if tk.Value < lo || tk.Value > hi {
				t.Errorf("tick %g outside [%g, %g]", tk.Value, lo, hi)
			}
			if tk.Label != "" {
				out = append(out, tk.Label)
			}
		}
		return out
	}
	for _, tc := range []struct {
		lo, hi float64
		want   string
	}{
		{2500, 14000, "3000 4000 5000 6000 7000 8000 9000 10000"}, // under a decade: every multiple
		{1500, 150000, "2000 5000 10000 20000 50000 100000"},      // two decades: 1, 2, 5
		{0.05, 2e4, "0.1 1 10 100 1000 10000"},                    // many: powers of ten only
		{3, 2, ""},
	} {
		if got := strings.Join(labels(tc.lo, tc.hi), " "); got != tc.want {
			t.Errorf("[%g, %g]: labels %q, want %q", tc.lo, tc.hi, got, tc.want)
		}
	}
}

package report

import (
	"math"
	"testing"
)

func TestDecimateMinMax(t *testing.T) {
	ramp := func(n int) ([]float64, []float64) {
		x := make([]float64, n)
		y := make([]float64, n)
		for i := range x {
			x[i] = float64(i) * 1e-3
			y[i] = math.Sin(float64(i) * 1e-2)
		}
		return x, y
	}
	tests := []struct {
		name      string
		n, max    int
		spikeAt   int     // index of a one-sample spike, or -1
		spike     float64 // its value
		nanAt     int     // index of a NaN sample, or -1
		wantAtMax int     // want at most this many points
		wantLen   int     // exact length when >0
	}{
		{name: "short input kept whole", n: 100, max: 2000, spikeAt: -1, nanAt: -1, wantAtMax: 100, wantLen: 100},
		{name: "NaN dropped from short input", n: 100, max: 2000, spikeAt: -1, nanAt: 50, wantAtMax: 99, wantLen: 99},
		{name: "long input bounded", n: 600000, max: 2000, spikeAt: -1, nanAt: -1, wantAtMax: 2000},
		{name: "positive spike survives", n: 60000, max: 2000, spikeAt: 31337, spike: 50, nanAt: -1, wantAtMax: 2000},
		{name: "negative spike survives", n: 60000, max: 2000, spikeAt: 7, spike: -50, nanAt: -1, wantAtMax: 2000},
		{name: "NaN in long input dropped", n: 60000, max: 2000, spikeAt: -1, nanAt: 1234, wantAtMax: 2000},
		{name: "tiny budget clamps to 2", n: 1000, max: 0, spikeAt: -1, nanAt: -1, wantAtMax: 2},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			x, y := ramp(tc.n)
			if tc.spikeAt >= 0 {
				y[tc.spikeAt] = tc.spike
			}
			if tc.nanAt >= 0 {
				y[tc.nanAt] = math.NaN()
			}
			xs, ys := decimateMinMax(x, y, tc.max)
			if len(xs) != len(ys) {
				t.Fatalf("len(xs)=%d len(ys)=%d", len(xs), len(ys))
			}
			if len(xs) > tc.wantAtMax {
				t.Errorf("got %d points, want at most %d", len(xs), tc.wantAtMax)
			}
			if tc.wantLen > 0 && len(xs) != tc.wantLen {
				t.Errorf("got %d points, want %d", len(xs), tc.wantLen)
			}
			for i := range xs {
				if math.IsNaN(ys[i]) {
					t.Fatalf("NaN kept at %d", i)
				}
				if i > 0 && xs[i] < xs[i-1] {
					t.Fatalf("x not in order at %d: %g after %g", i, xs[i], xs[i-1])
				}
			}
			if tc.spikeAt >= 0 {
				found := false
				for i := range xs {
					if ys[i] == tc.spike && xs[i] == x[tc.spikeAt] {
						found = true
					}
				}
				if !found {
					t.Errorf("spike %g at x=%g lost by thinning", tc.spike, x[tc.spikeAt])
				}
			}
			// Global extremes of the finite input are always kept.
			lo, hi := span(y)
			glo, ghi := span(ys)
			if tc.max >= 2 && (lo != glo || hi != ghi) {
				t.Errorf("extremes [%g, %g] became [%g, %g]", lo, hi, glo, ghi)
			}
		})
	}
}

func TestPickEvenly(t *testing.T) {
	tests := []struct {
		n, k int
		want []int
	}{
		{0, 5, []int{}},
		{3, 5, []int{0, 1, 2}},
		{5, 5, []int{0, 1, 2, 3, 4}},
		{10, 3, []int{0, 5, 9}},
		{100, 2, []int{0, 99}},
	}
	for _, tc := range tests {
		got := pickEvenly(tc.n, tc.k)
		if len(got) != len(tc.want) {
			t.Errorf("pickEvenly(%d,%d) = %v, want %v", tc.n, tc.k, got, tc.want)
			continue
		}
		for i := range got {
			if got[i] != tc.want[i] {
				t.Errorf("pickEvenly(%d,%d) = %v, want %v", tc.n, tc.k, got, tc.want)
				break
			}
		}
	}
}

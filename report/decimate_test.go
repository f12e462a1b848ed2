package report

import (
	"math"
	"slices"
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
		if got := pickEvenly(tc.n, tc.k); !slices.Equal(got, tc.want) {
			t.Errorf("pickEvenly(%d,%d) = %v, want %v", tc.n, tc.k, got, tc.want)
		}
	}
}

func TestDecimateRuns(t *testing.T) {
	nan := math.NaN()
	tests := []struct {
		name       string
		y          []float64 // x is the index
		max        int
		wantRuns   int
		wantFinite int
		wantKept   int // exact when >= 0
	}{
		{name: "empty", y: nil, max: 10, wantRuns: 0, wantFinite: 0, wantKept: 0},
		{name: "all NaN", y: []float64{nan, nan}, max: 10, wantRuns: 0, wantFinite: 0, wantKept: 0},
		{name: "one run kept whole", y: []float64{1, 2, 3}, max: 10, wantRuns: 1, wantFinite: 3, wantKept: 3},
		{name: "gap splits the line", y: []float64{1, 2, nan, nan, 3, 4, 5}, max: 10, wantRuns: 2, wantFinite: 5, wantKept: 5},
		{name: "leading and trailing NaN", y: []float64{nan, 1, 2, nan}, max: 10, wantRuns: 1, wantFinite: 2, wantKept: 2},
		{name: "lone sample is a run", y: []float64{1, nan, 2, nan, 3}, max: 10, wantRuns: 3, wantFinite: 3, wantKept: 3},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			x := make([]float64, len(tc.y))
			for i := range x {
				x[i] = float64(i)
			}
			runs, kept, finite := decimateRuns(x, tc.y, tc.max)
			if len(runs) != tc.wantRuns || finite != tc.wantFinite || (tc.wantKept >= 0 && kept != tc.wantKept) {
				t.Errorf("got %d runs, %d kept, %d finite; want %d, %d, %d", len(runs), kept, finite, tc.wantRuns, tc.wantKept, tc.wantFinite)
			}
			for _, r := range runs {
				for _, v := range r.y {
					if math.IsNaN(v) {
						t.Errorf("NaN inside a run")
					}
				}
			}
		})
	}

	// A long line with one gap per "swing" is thinned to about the budget
	// and keeps its spike.
	n := 100000
	x := make([]float64, n)
	y := make([]float64, n)
	for i := range x {
		x[i] = float64(i)
		y[i] = math.Sin(float64(i) / 300)
		if (i/1000)%2 == 1 {
			y[i] = nan
		}
	}
	y[42420] = 99
	runs, kept, finite := decimateRuns(x, y, 2000)
	if len(runs) != 50 || finite != n/2 {
		t.Fatalf("got %d runs, %d finite; want 50, %d", len(runs), finite, n/2)
	}
	if kept > 2000 {
		t.Errorf("kept %d points, budget 2000", kept)
	}
	found := false
	for _, r := range runs {
		for i := range r.y {
			if r.y[i] == 99 && r.x[i] == 42420 {
				found = true
			}
		}
	}
	if !found {
		t.Error("spike lost")
	}
}

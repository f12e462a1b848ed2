package hil

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"
	"time"
)

func TestHistogramQuantiles(t *testing.T) {
	tests := []struct {
		name          string
		values        []time.Duration
		p50, p99, max time.Duration
	}{
		{"empty", nil, 0, 0, 0},
		{"one value", []time.Duration{37 * time.Microsecond}, 37 * time.Microsecond, 37 * time.Microsecond, 37 * time.Microsecond},
		{"negative counts as zero", []time.Duration{-5 * time.Microsecond}, 0, 0, 0},
		// The old fixed-bin histogram stopped at 20 ms and reported Max for
		// anything beyond; a second is now recorded like any other value.
		{"a second", []time.Duration{time.Second}, time.Second, time.Second, time.Second},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			var h Histogram
			for _, v := range tc.values {
				h.Add(v)
			}
			if got := h.Quantile(0.5); got != tc.p50 {
				t.Errorf("p50 = %v, want %v", got, tc.p50)
			}
			if got := h.Quantile(0.99); got != tc.p99 {
				t.Errorf("p99 = %v, want %v", got, tc.p99)
			}
			if got := h.Max(); got != tc.max {
				t.Errorf("max = %v, want %v", got, tc.max)
			}
		})
	}
}

// nearestRank is the independent computation of a quantile: sort, take the
// value at rank ⌊q·n + ½⌋ (at least 1), the rank Histogram documents.
func nearestRank(sorted []time.Duration, q float64) time.Duration {
	k := int(math.Floor(q*float64(len(sorted)) + 0.5))
	k = max(1, min(k, len(sorted)))
	return sorted[k-1]
}

// TestHistogramTailBeyondTheOldCap is the latency-stress defect: more than
// 1 % of the samples beyond 20 ms made the old histogram report p99 = max.
// With a long tail the p99 must be the value at its rank, to the
// documented precision, and never below it.
func TestHistogramTailBeyondTheOldCap(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	var vals []time.Duration
	h := NewHistogram()
	for i := 0; i < 20000; i++ {
		d := time.Duration(200+rng.IntN(6000)) * time.Microsecond
		if i%40 == 0 { // 2.5 % far out, up to 100 ms
			d = time.Duration(20+rng.IntN(80)) * time.Millisecond
		}
		d += time.Duration(rng.IntN(1000)) // sub-µs part, as real round trips have
		vals = append(vals, d)
		h.Add(d)
	}
	slices.Sort(vals)
	for _, q := range []float64{0, 0.001, 0.5, 0.9, 0.99, 0.999, 1} {
		want := nearestRank(vals, q)
		got := h.Quantile(q)
		if got < want || float64(got-want) > HistogramPrecision*float64(want)+1 {
			t.Errorf("q=%v: %v, want %v (+%.3g relative at most)", q, got, want, HistogramPrecision)
		}
	}
	if h.Max() != vals[len(vals)-1] {
		t.Errorf("max %v, want %v exactly", h.Max(), vals[len(vals)-1])
	}
	if h.Quantile(0.99) >= h.Max() {
		t.Errorf("p99 %v reaches the max %v: the tail saturated the histogram", h.Quantile(0.99), h.Max())
	}
}

func TestHistogramUniform(t *testing.T) {
	// 1.5 … 1000.5 µs once each: the p-quantile is the value at rank p·1000.
	var h Histogram
	for i := 1; i <= 1000; i++ {
		h.Add(time.Duration(i)*time.Microsecond + 500*time.Nanosecond)
	}
	near := func(name string, got, want time.Duration) {
		t.Helper()
		if got < want || float64(got-want) > HistogramPrecision*float64(want)+1 {
			t.Errorf("%s = %v, want %v to %.3g relative", name, got, want, HistogramPrecision)
		}
	}
	near("p50", h.Quantile(0.5), 500*time.Microsecond+500*time.Nanosecond)
	near("p99", h.Quantile(0.99), 990*time.Microsecond+500*time.Nanosecond)
	if got, want := h.Max(), 1000*time.Microsecond+500*time.Nanosecond; got != want {
		t.Errorf("max = %v, want %v", got, want)
	}
	if got, want := h.Mean(), 501*time.Microsecond; got != want {
		t.Errorf("mean = %v, want %v", got, want)
	}
	h.Reset()
	if h.Count() != 0 || h.Quantile(0.5) != 0 || h.Max() != 0 {
		t.Errorf("after Reset: count %d, p50 %v, max %v", h.Count(), h.Quantile(0.5), h.Max())
	}
}

func TestHistogramAddDoesNotAllocate(t *testing.T) {
	h := NewHistogram()
	if n := testing.AllocsPerRun(1000, func() { h.Add(123 * time.Microsecond); h.Add(3 * time.Second) }); n != 0 {
		t.Fatalf("Add allocates %.1f times", n)
	}
}

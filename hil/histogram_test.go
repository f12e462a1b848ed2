package hil

import (
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
		{"overflow reports max", []time.Duration{time.Second}, time.Second, time.Second, time.Second},
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

func TestHistogramUniform(t *testing.T) {
	// 1 … 1000 µs once each: the p-quantile is p·1000 µs to the bin.
	var h Histogram
	for i := 1; i <= 1000; i++ {
		h.Add(time.Duration(i)*time.Microsecond + 500*time.Nanosecond)
	}
	if got, want := h.Quantile(0.5), 501*time.Microsecond; got != want {
		t.Errorf("p50 = %v, want %v", got, want)
	}
	if got, want := h.Quantile(0.99), 991*time.Microsecond; got != want {
		t.Errorf("p99 = %v, want %v", got, want)
	}
	if got, want := h.Max(), 1000*time.Microsecond+500*time.Nanosecond; got != want {
		t.Errorf("max = %v, want %v", got, want)
	}
	if got, want := h.Mean(), 501*time.Microsecond; got != want {
		t.Errorf("mean = %v, want %v", got, want)
	}
}

func TestHistogramAddDoesNotAllocate(t *testing.T) {
	h := new(Histogram)
	if n := testing.AllocsPerRun(1000, func() { h.Add(123 * time.Microsecond) }); n != 0 {
		t.Fatalf("Add allocates %.1f times", n)
	}
}

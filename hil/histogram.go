package hil

import (
	"math"
	"time"
)

// histogramBins is the number of 1 µs bins of a Histogram: 0 … 20 ms. A
// fixed array keeps recording free of allocation; a value beyond the last
// bin is counted as overflow and still sets Max exactly.
const histogramBins = 20000

// Histogram records durations with 1 µs resolution in a fixed array, so
// recording one tick's jitter or one command's round trip never allocates.
// Percentiles are exact to the bin (1 µs) below 20 ms.
type Histogram struct {
	bins     [histogramBins]uint32
	overflow uint64
	count    uint64
	sum      float64 // µs, for the mean
	max      time.Duration
}

// Add records one duration. Negative values count as zero.
func (h *Histogram) Add(d time.Duration) {
	if d < 0 {
		d = 0
	}
	h.count++
	h.sum += float64(d) / float64(time.Microsecond)
	if d > h.max {
		h.max = d
	}
	us := int64(d / time.Microsecond)
	if us >= histogramBins {
		h.overflow++
		return
	}
	h.bins[us]++
}

// Count is the number of durations recorded.
func (h *Histogram) Count() uint64 { return h.count }

// Max is the largest duration recorded.
func (h *Histogram) Max() time.Duration { return h.max }

// Mean is the average duration, 0 when empty.
func (h *Histogram) Mean() time.Duration {
	if h.count == 0 {
		return 0
	}
	return time.Duration(h.sum / float64(h.count) * float64(time.Microsecond))
}

// Quantile returns the smallest bin edge below which at least a fraction q
// (0…1) of the recorded durations lie, as the upper edge of that 1 µs bin
// (so it never understates). Values in the overflow report Max.
func (h *Histogram) Quantile(q float64) time.Duration {
	if h.count == 0 {
		return 0
	}
	q = math.Max(0, math.Min(1, q))
	need := uint64(math.Ceil(q * float64(h.count)))
	if need == 0 {
		need = 1
	}
	var seen uint64
	for i, c := range h.bins {
		seen += uint64(c)
		if seen >= need {
			edge := time.Duration(i+1) * time.Microsecond
			if edge > h.max {
				edge = h.max
			}
			return edge
		}
	}
	return h.max
}

// Summary is the figures a report shows for one histogram, in microseconds.
type Summary struct {
	Count uint64  `json:"count"` // samples recorded
	P50   float64 `json:"p50"`   // median, µs
	P99   float64 `json:"p99"`   // 99th percentile, µs
	Max   float64 `json:"max"`   // largest sample, µs
	Mean  float64 `json:"mean"`  // arithmetic mean, µs
}

// Summarize returns count, p50, p99, max and mean in microseconds.
func (h *Histogram) Summarize() Summary {
	us := func(d time.Duration) float64 { return float64(d) / float64(time.Microsecond) }
	return Summary{Count: h.count, P50: us(h.Quantile(0.5)), P99: us(h.Quantile(0.99)), Max: us(h.max), Mean: us(h.Mean())}
}

// Reset forgets everything recorded.
func (h *Histogram) Reset() { *h = Histogram{} }

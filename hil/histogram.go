package hil

import (
	"math"
	"time"

	hdr "github.com/HdrHistogram/hdrhistogram-go"
)

// Histogram limits. Durations are recorded in nanoseconds with three
// significant decimal digits: an HDR histogram then keeps every value to
// within 1/1024 of itself (its sub-buckets are 2048 wide, so a bucket spans
// at most 2⁻¹⁰ of the values in it), from 1 ns up to histogramTop, in about
// 300 KB allocated once. A value beyond histogramTop (an hour: far beyond
// any round trip a run survives) is counted at histogramTop and still sets
// Max exactly, so nothing is lost and the quantiles never stop at a cap a
// run can reach.
const (
	histogramDigits = 3
	histogramTop    = int64(time.Hour)
)

// HistogramPrecision is the largest relative amount by which a quantile
// reported by a Histogram exceeds the recorded value at its rank (the
// width of an HDR sub-bucket at three significant digits, 2⁻¹⁰), plus one
// nanosecond for the integer bucket edges. A quantile is never below the
// value at its rank.
const HistogramPrecision = 1.0 / 1024

// Histogram records durations without allocating, for one tick's jitter or
// one command's round trip. It wraps an HDR histogram (HdrHistogram's Go
// port), whose buckets grow geometrically, so a long tail never saturates
// it: a spike of 100 ms is recorded as exactly as one of 100 µs, to
// HistogramPrecision. Use NewHistogram to allocate up front; the zero
// value allocates on its first Add.
type Histogram struct {
	h     *hdr.Histogram
	count uint64
	sum   float64 // ns, for the mean
	max   time.Duration
}

// NewHistogram returns an empty histogram with its buckets allocated.
func NewHistogram() *Histogram {
	return &Histogram{h: hdr.New(1, histogramTop, histogramDigits)}
}

// Add records one duration. Negative values count as zero.
func (h *Histogram) Add(d time.Duration) {
	if h.h == nil {
		h.h = hdr.New(1, histogramTop, histogramDigits)
	}
	if d < 0 {
		d = 0
	}
	h.count++
	h.sum += float64(d)
	if d > h.max {
		h.max = d
	}
	v := int64(d)
	if v > histogramTop {
		v = histogramTop
	}
	// RecordValue fails only beyond the top, which v is not.
	_ = h.h.RecordValue(v)
}

// Count is the number of durations recorded.
func (h *Histogram) Count() uint64 { return h.count }

// Max is the largest duration recorded, exactly.
func (h *Histogram) Max() time.Duration { return h.max }

// Mean is the average duration, 0 when empty.
func (h *Histogram) Mean() time.Duration {
	if h.count == 0 {
		return 0
	}
	return time.Duration(h.sum / float64(h.count))
}

// Quantile returns the q-quantile (0…1) of the recorded durations: the
// value at rank ⌊q·n + ½⌋ (at least 1) in ascending order, reported as the
// upper edge of its HDR bucket, so it never understates and exceeds the
// value by at most HistogramPrecision of it; it is never above Max. It is
// 0 when nothing was recorded.
func (h *Histogram) Quantile(q float64) time.Duration {
	if h.count == 0 || h.h == nil {
		return 0
	}
	q = math.Max(0, math.Min(1, q))
	n := float64(h.count)
	rank := math.Max(1, math.Floor(q*n+0.5))
	// HDR picks rank int(p/100·n + ½); asking for (rank − ¼)/n lands on
	// rank exactly, whatever the rounding of p, and keeps rank ≥ 1 (HDR's
	// own rank for a tiny q is 0, its lowest bucket's edge).
	v := time.Duration(h.h.ValueAtQuantile((rank - 0.25) / n * 100))
	if v > h.max {
		v = h.max
	}
	return v
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

// Reset forgets everything recorded and keeps the buckets.
func (h *Histogram) Reset() {
	if h.h != nil {
		h.h.Reset()
	}
	h.count, h.sum, h.max = 0, 0, 0
}

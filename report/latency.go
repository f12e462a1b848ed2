package report

import (
	"math"
	"sort"
)

// latencyCriterion is the summary criterion that limits the p99 round trip
// (hil/ending.go writes it under this name; its limit is drawn on the
// latency plots).
const latencyCriterion = "max_latency_p99_us"

// ecdf is the empirical distribution of a set of samples.
type ecdf struct {
	sorted []float64 // the finite samples, ascending
}

// newECDF keeps the finite, positive samples of v (a round trip of zero or
// less is not a measurement, and a log axis cannot show it) and sorts them.
// It reports how many samples were left out.
func newECDF(v []float64) (e ecdf, dropped int) {
	e.sorted = make([]float64, 0, len(v))
	for _, x := range v {
		if x > 0 && !math.IsInf(x, 0) {
			e.sorted = append(e.sorted, x)
		} else if !math.IsNaN(x) {
			dropped++
		}
	}
	sort.Float64s(e.sorted)
	return e, dropped
}

// quantile returns the nearest-rank q-quantile: the smallest sample with
// at least a fraction q of the samples at or below it. NaN without samples.
func (e ecdf) quantile(q float64) float64 {
	n := len(e.sorted)
	if n == 0 {
		return math.NaN()
	}
	k := int(math.Ceil(q*float64(n))) - 1
	return e.sorted[max(0, min(k, n-1))]
}

// points returns at most about maxPoints corners of the distribution
// function as (sample, fraction of samples ≤ sample), ascending, always
// including the smallest and the largest sample. The samples kept are
// evenly spaced in rank, so every part of the distribution gets the same
// share of the budget and the tail beyond p99 is drawn as faithfully as
// the bulk. Tied samples give one corner at the top of their step.
func (e ecdf) points(maxPoints int) (x, p []float64) {
	n := len(e.sorted)
	if n == 0 {
		return nil, nil
	}
	idx := pickEvenly(n, max(maxPoints, 2))
	x = make([]float64, 0, len(idx))
	p = make([]float64, 0, len(idx))
	for _, i := range idx {
		j := i
		for j+1 < n && e.sorted[j+1] == e.sorted[i] {
			j++
		}
		if len(x) > 0 && x[len(x)-1] == e.sorted[j] {
			continue
		}
		x = append(x, e.sorted[j])
		p = append(p, float64(j+1)/float64(n))
	}
	return x, p
}

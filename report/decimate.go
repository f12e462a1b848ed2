package report

import "math"

// defaultMaxPoints is the most points drawn per line. Two thousand points is
// finer than the pixel width of a plot on any common screen, and keeps a
// 10-minute 1 kHz run's report to a few megabytes.
const defaultMaxPoints = 2000

// decimateMinMax thins (x, y) to at most maxPoints points. It splits the
// samples into maxPoints/2 buckets of consecutive indices and keeps, from
// each bucket, the samples with the smallest and the largest y, in their
// original order, so peaks and dips are never lost to the thinning (a plain
// stride would drop a one-tick friction spike). Samples whose x or y is NaN
// or infinite are dropped. The input is not modified; when nothing needs
// thinning the finite samples are returned as new slices.
func decimateMinMax(x, y []float64, maxPoints int) (xs, ys []float64) {
	n := min(len(x), len(y))
	if maxPoints < 2 {
		maxPoints = 2
	}
	if n <= maxPoints {
		xs = make([]float64, 0, n)
		ys = make([]float64, 0, n)
		for i := 0; i < n; i++ {
			if finitePoint(x, y, i) {
				xs = append(xs, x[i])
				ys = append(ys, y[i])
			}
		}
		return xs, ys
	}
	buckets := maxPoints / 2
	xs = make([]float64, 0, 2*buckets)
	ys = make([]float64, 0, 2*buckets)
	for b := 0; b < buckets; b++ {
		lo := b * n / buckets
		hi := (b + 1) * n / buckets
		iMin, iMax := -1, -1
		for i := lo; i < hi; i++ {
			if !finitePoint(x, y, i) {
				continue
			}
			if iMin < 0 || y[i] < y[iMin] {
				iMin = i
			}
			if iMax < 0 || y[i] > y[iMax] {
				iMax = i
			}
		}
		switch {
		case iMin < 0:
			// The whole bucket was NaN: nothing to draw.
		case iMin == iMax:
			xs = append(xs, x[iMin])
			ys = append(ys, y[iMin])
		case iMin < iMax:
			xs = append(xs, x[iMin], x[iMax])
			ys = append(ys, y[iMin], y[iMax])
		default:
			xs = append(xs, x[iMax], x[iMin])
			ys = append(ys, y[iMax], y[iMin])
		}
	}
	return xs, ys
}

// finitePoint reports whether sample i has a finite x and a finite y.
func finitePoint(x, y []float64, i int) bool {
	return !math.IsNaN(x[i]) && !math.IsInf(x[i], 0) && !math.IsNaN(y[i]) && !math.IsInf(y[i], 0)
}

// run is a stretch of consecutive finite samples: a line is drawn through
// each run, and the line breaks between runs (a foot in the air has no
// friction cone, so its envelope must not be joined across the swing).
type run struct{ x, y []float64 }

// decimateRuns splits (x, y) at non-finite samples into runs and thins
// them with decimateMinMax, sharing the point budget between runs by their
// length (at least two points each, so a short run is still drawn). It
// returns the runs, the number of points kept and the number of finite
// samples there were.
func decimateRuns(x, y []float64, maxPoints int) (runs []run, kept, finiteCount int) {
	n := min(len(x), len(y))
	type span struct{ lo, hi int }
	var spans []span
	total := 0
	for i := 0; i < n; {
		if !finitePoint(x, y, i) {
			i++
			continue
		}
		j := i
		for j < n && finitePoint(x, y, j) {
			j++
		}
		spans = append(spans, span{i, j})
		total += j - i
		i = j
	}
	runs = make([]run, 0, len(spans))
	for _, s := range spans {
		budget := 2
		if total > 0 {
			budget = max(2, maxPoints*(s.hi-s.lo)/total)
		}
		xs, ys := decimateMinMax(x[s.lo:s.hi], y[s.lo:s.hi], budget)
		runs = append(runs, run{xs, ys})
		kept += len(xs)
	}
	return runs, kept, total
}

// thinPath thins a curve drawn in the plane (a phase portrait, where x is
// not time and the min/max buckets of decimateMinMax would join points of
// different loops) to at most about maxPoints points: it keeps a point only
// when it has moved at least eps of either axis's span from the last kept
// one, doubling eps until the budget is met. Every turn of the curve larger
// than eps survives; the first and last finite points of each run of
// finite samples are always kept. Non-finite samples split the curve.
func thinPath(x, y []float64, maxPoints int) (runs []run, kept, finite int) {
	n := min(len(x), len(y))
	xlo, xhi := span(x[:n])
	ylo, yhi := span(y[:n])
	sx, sy := math.Max(xhi-xlo, 1e-300), math.Max(yhi-ylo, 1e-300)
	for eps := 1.0 / 2000; ; eps *= 2 {
		runs, kept, finite = runs[:0], 0, 0
		var cur run
		lastX, lastY := math.NaN(), math.NaN()
		flush := func(i int) {
			if len(cur.x) == 0 {
				return
			}
			if cur.x[len(cur.x)-1] != x[i] || cur.y[len(cur.y)-1] != y[i] {
				cur.x, cur.y = append(cur.x, x[i]), append(cur.y, y[i])
			}
			kept += len(cur.x)
			runs = append(runs, cur)
			cur = run{}
		}
		for i := 0; i < n; i++ {
			if !finitePoint(x, y, i) {
				flush(i - 1)
				lastX = math.NaN()
				continue
			}
			finite++
			if math.IsNaN(lastX) || math.Abs(x[i]-lastX) >= eps*sx || math.Abs(y[i]-lastY) >= eps*sy {
				cur.x, cur.y = append(cur.x, x[i]), append(cur.y, y[i])
				lastX, lastY = x[i], y[i]
			}
		}
		if n > 0 && finitePoint(x, y, n-1) {
			flush(n - 1)
		}
		if kept <= maxPoints || eps > 1 {
			return runs, kept, finite
		}
	}
}

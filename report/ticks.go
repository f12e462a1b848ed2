package report

import (
	"math"
	"strconv"

	"gonum.org/v1/plot"
)

// niceTicks puts labelled ticks at round numbers (1, 2 or 5 times a power
// of ten) about five to eight per axis, with four unlabelled ticks between
// each pair, and labels printed with no more decimals than the step needs:
// "0 5 10 15 s" reads faster than "2.50 10.00 17.50".
type niceTicks struct{}

// Ticks implements plot.Ticker.
func (niceTicks) Ticks(lo, hi float64) []plot.Tick {
	if !(hi > lo) || math.IsInf(lo, 0) || math.IsInf(hi, 0) {
		return nil
	}
	step := niceStep((hi - lo) / 6)
	minor := step / 5
	decimals := max(0, -int(math.Floor(math.Log10(step)+1e-9)))
	var ts []plot.Tick
	start := math.Ceil(lo/minor-1e-9) * minor
	for i := 0; ; i++ {
		v := start + float64(i)*minor
		if v > hi+minor*1e-9 || i > 1000 {
			break
		}
		// Decide "major" on the integer count of minor steps from zero, so
		// rounding never drops a label.
		k := math.Round(v / minor)
		if int64(k)%5 == 0 {
			v = k * minor
			if v == 0 {
				v = 0 // no "-0"
			}
			ts = append(ts, plot.Tick{Value: v, Label: strconv.FormatFloat(v, 'f', decimals, 64)})
		} else {
			ts = append(ts, plot.Tick{Value: v})
		}
	}
	return ts
}

// niceStep rounds raw up to 1, 2 or 5 times a power of ten.
func niceStep(raw float64) float64 {
	if raw <= 0 || math.IsNaN(raw) {
		return 1
	}
	p := math.Pow(10, math.Floor(math.Log10(raw)))
	for _, m := range []float64{1, 2, 5, 10} {
		if m*p >= raw*(1-1e-9) {
			return m * p
		}
	}
	return 10 * p
}

// logTicks marks a log axis at 1, 2 and 5 times each power of ten with
// labels, and at the other whole multiples without, so a range of less than
// a decade (latencies from 3 to 12 ms) still gets several labelled ticks;
// over many decades only the powers of ten are labelled.
type logTicks struct{}

// Ticks implements plot.Ticker.
func (logTicks) Ticks(lo, hi float64) []plot.Tick {
	if !(lo > 0) || !(hi > lo) || math.IsInf(hi, 0) {
		return nil
	}
	decades := math.Log10(hi / lo)
	var ts []plot.Tick
	for e := math.Floor(math.Log10(lo)); e <= math.Ceil(math.Log10(hi)); e++ {
		p := math.Pow(10, e)
		for m := 1; m <= 9; m++ {
			v := float64(m) * p
			if v < lo*(1-1e-12) || v > hi*(1+1e-12) {
				continue
			}
			label := m == 1 || (decades < 3 && (m == 2 || m == 5)) || decades < 1
			t := plot.Tick{Value: v}
			if label {
				t.Label = strconv.FormatFloat(v, 'f', max(0, int(-e)), 64)
			}
			ts = append(ts, t)
		}
	}
	return ts
}

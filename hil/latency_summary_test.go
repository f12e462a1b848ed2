package hil

import (
	"context"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"testing"
	"time"

	"gaitrig/internal/retrytest"
	"gaitrig/record"
)

// The summary's round-trip figures are the telemetry's: p50, p99 and max
// computed independently from the latency_us column of telemetry.csv
// (sorted, value at rank ⌊q·n + ½⌋) agree with summary.json to the HDR
// histogram's precision (HistogramPrecision relative, never below), the
// max exactly, and the count is the number of rows with a latency. A
// latency fault with a 30 ms jitter puts most samples past the 20 ms where
// the old histogram stopped (it then reported p99 = max) and stale commands
// pile up behind it; neither may leak into the figures.
func TestSummaryLatencyMatchesTelemetry(t *testing.T) {
	m, s, cfg := timedDemo(t, 1)
	cfg.Clock = Wallclock
	cfg.LinkFaults = []LinkFault{{Kind: FaultLatency, Fixed: 2 * time.Millisecond, Jitter: 30 * time.Millisecond}}
	cfg.Watchdog = 300 * time.Millisecond // beyond the longest injected delay
	// The check needs samples; a saturated host may leave a 1 s wall-clock
	// run with few timed commands (the firmware barely ran). Counted, such
	// a run is spoiled like an invalid one and run again.
	type latencyRun struct {
		res   Result
		run   *record.Run
		ticks []record.Tick
	}
	lr := retrytest.UntilValid(t, "the jittered wall-clock run", func(int) (latencyRun, record.Summary) {
		res, run, ticks := runAndRead(t, context.Background(), cfg, m, s, referenceFirmware)
		sum := res.Summary
		if n := res.Latency.Count; n < 50 && sum.Outcome != record.Invalid {
			sum.Outcome = record.Invalid
			sum.Reason = fmt.Sprintf("only %d commands timed in the run (%s): the host barely ran the firmware", n, res.Summary.Outcome)
		}
		return latencyRun{res, run, ticks}, sum
	})
	res, run, ticks := lr.res, lr.run, lr.ticks
	var col []float64
	for _, row := range ticks {
		if !math.IsNaN(row.LatencyUS) {
			col = append(col, row.LatencyUS)
		}
	}
	sum := run.Summary.LatencyUS
	if len(col) < 50 || sum == nil {
		t.Fatalf("%d rows with a latency, summary %+v (outcome %s: %s)", len(col), sum, run.Summary.Outcome, run.Summary.Reason)
	}
	slices.Sort(col)
	rank := func(q float64) float64 {
		k := int(math.Floor(q*float64(len(col)) + 0.5))
		return col[max(1, min(k, len(col)))-1]
	}
	near := func(name string, got, want float64) {
		t.Helper()
		// µs; the +1e-3 is the histogram's 1 ns integer edge.
		if got < want || got-want > HistogramPrecision*want+1e-3 {
			t.Errorf("%s: summary %.3f µs, telemetry %.3f µs (allowed +%.3g relative)", name, got, want, HistogramPrecision)
		}
	}
	near("p50", sum.P50, rank(0.5))
	near("p99", sum.P99, rank(0.99))
	if sum.Max != col[len(col)-1] {
		t.Errorf("max: summary %v µs, telemetry %v µs; want them equal", sum.Max, col[len(col)-1])
	}
	if sum.Count != uint64(len(col)) || res.Latency.Count != uint64(len(col)) {
		t.Errorf("summary counts %d samples (result %d), the telemetry has %d", sum.Count, res.Latency.Count, len(col))
	}
	if col[len(col)/2] < 20e3 && rank(0.99) < 20e3 {
		t.Fatalf("p99 %.0f µs: the injected jitter should put the tail past 20 ms", rank(0.99))
	}
	if sum.P99 >= sum.Max && rank(0.99) < col[len(col)-1] {
		t.Errorf("p99 %v equals the max %v although the telemetry's does not", sum.P99, sum.Max)
	}
	if run.Summary.StaleCommands != res.Link.StaleCommands {
		t.Errorf("summary stale_commands %d, loop counted %d", run.Summary.StaleCommands, res.Link.StaleCommands)
	}
	t.Logf("%d samples: p50 %.0f µs, p99 %.0f µs, max %.0f µs; %d stale commands kept out; outcome %s",
		len(col), sum.P50, sum.P99, sum.Max, run.Summary.StaleCommands, run.Summary.Outcome)
}

// A run that timed no command (it tripped before the first answer) has no
// latency figures: null in summary.json, not zeros.
func TestNoLatencySamplesAreNull(t *testing.T) {
	m, s, cfg := timedDemo(t, 1)
	cfg.Clock = Wallclock
	cfg.Watchdog = 20 * time.Millisecond
	_, run, _ := runAndRead(t, context.Background(), cfg, m, s, silentFirmware)
	l := run.Summary.LatencyUS
	if run.Summary.Outcome == record.Pass || l == nil {
		t.Fatalf("outcome %s, latency %+v", run.Summary.Outcome, l)
	}
	if !math.IsNaN(l.P50) || !math.IsNaN(l.P99) || !math.IsNaN(l.Max) || l.Count != 0 {
		t.Fatalf("latency with no samples = %+v, want NaN (null) figures", l)
	}
	raw, err := os.ReadFile(filepath.Join(run.Dir, record.SummaryFile))
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Latency map[string]any `json:"latency_us"`
	}
	if err := json.Unmarshal(raw, &doc); err != nil {
		t.Fatal(err)
	}
	if len(doc.Latency) != 3 || doc.Latency["p50"] != nil || doc.Latency["p99"] != nil || doc.Latency["max"] != nil {
		t.Errorf("summary.json does not write the missing latency as null:\n%s", raw)
	}
}

package hil

import (
	"context"
	"testing"
	"time"

	"gaitrig/record"
)

// A bounded wall-clock run at 1 kHz against the reference firmware over
// the in-process link: every tick is accounted for and the latency and
// jitter figures are filled. Timing numbers are only logged: speed is for
// benchmarks, not for asserts.
func TestWallclockInproc1kHz(t *testing.T) {
	m, s, cfg := demo(t, 0)
	cfg.Clock = Wallclock
	cfg.MaxSteps, cfg.Duration = 0, 0.5
	cfg.Watchdog = time.Second // generous: other tests share the 2 cores
	var lines []string
	cfg.Log = func(l string) { lines = append(lines, l) }
	res, dir, err, ferr := runWith(t, context.Background(), cfg, m, s, referenceFirmware)
	if err != nil || ferr != nil {
		t.Fatal(err, ferr)
	}
	sum := res.Summary
	if sum.Ticks != 500 {
		t.Fatalf("%d ticks in 0.5 s at 1 kHz, want 500", sum.Ticks)
	}
	if sum.Outcome == record.Tripped || sum.Outcome == record.Aborted {
		t.Fatalf("outcome %s (%s)", sum.Outcome, sum.Reason)
	}
	if res.Latency.Count < 400 || sum.LatencyUS == nil || sum.JitterUS == nil {
		t.Fatalf("latency recorded for %d commands; summary latency %v jitter %v", res.Latency.Count, sum.LatencyUS, sum.JitterUS)
	}
	if res.Realtime == "" {
		t.Error("no word on the scheduling class")
	}
	run := openRun(t, dir)
	ticks, _, err := run.AllTicks()
	if err != nil || len(ticks) != 500 {
		t.Fatalf("%d telemetry rows, err %v", len(ticks), err)
	}
	fresh := 0
	for _, row := range ticks {
		if row.Fresh {
			fresh++
		}
		if row.WallS <= 0 {
			t.Fatalf("tick %d has wall time %g", row.Index, row.WallS)
		}
	}
	t.Logf("%s; %d of 500 ticks had a fresh command; latency p50 %.0f µs p99 %.0f µs max %.0f µs; jitter p50 %.0f p99 %.0f max %.0f µs; %d deadline misses",
		res.Realtime, fresh, sum.LatencyUS.P50, sum.LatencyUS.P99, sum.LatencyUS.Max, sum.JitterUS.P50, sum.JitterUS.P99, sum.JitterUS.Max, sum.DeadlineMisses)
}

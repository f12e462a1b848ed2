package hil

import (
	"context"
	"runtime"
	"testing"
	"time"

	"gaitrig/firmware/reference"
	"gaitrig/plant"
	"gaitrig/record"
)

// runTicks runs the demo walker for n ticks in lockstep against the
// reference firmware over inproc, recording into a run folder when rec is
// true, and returns the mallocs the process made during the run.
func runTicks(tb testing.TB, n int, rec bool) (mallocs uint64, elapsed time.Duration) {
	return runTicksOver(tb, n, rec, false)
}

// runTicksOver is runTicks over the goroutine pair (direct false) or the
// synchronous in-process link (direct true).
func runTicksOver(tb testing.TB, n int, rec, direct bool) (mallocs uint64, elapsed time.Duration) {
	tb.Helper()
	m, s, cfg := timedDemo(tb, float64(n)/DefaultTickHz)
	conn, done := lockstepLink(tb, direct)
	defer conn.Close()
	var w *record.Writer
	if rec {
		w = newRecord(tb, cfg, m, s)
	}
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	start := time.Now()
	res, err := Run(context.Background(), cfg, m, s, conn, w)
	elapsed = time.Since(start)
	runtime.ReadMemStats(&after)
	if err != nil {
		tb.Fatal(err)
	}
	if res.Summary.Ticks != int64(n) {
		tb.Fatalf("ran %d ticks, want %d (%s: %s)", res.Summary.Ticks, n, res.Summary.Outcome, res.Summary.Reason)
	}
	if err := <-done; err != nil {
		tb.Fatal(err)
	}
	return after.Mallocs - before.Mallocs, elapsed
}

// The tick loop, the firmware and the telemetry writer allocate nothing per
// tick: a run three times longer makes no more allocations than a short
// one beyond a small fixed slack (buffers that grow once, the events of
// run start and end).
func TestTickLoopDoesNotAllocate(t *testing.T) {
	for _, direct := range []bool{false, true} {
		for _, rec := range []bool{false, true} {
			short, _ := runTicksOver(t, 1000, rec, direct)
			long, _ := runTicksOver(t, 4000, rec, direct)
			perTick := (float64(long) - float64(short)) / 3000
			t.Logf("direct %v, record %v: %d mallocs for 1000 ticks, %d for 4000: %.4f per tick", direct, rec, short, long, perTick)
			if perTick > 0.01 {
				t.Errorf("direct %v, record %v: %.3f allocations per tick, want 0", direct, rec, perTick)
			}
		}
	}
}

// BenchmarkLockstepInproc runs the demo walker in lockstep against the
// reference firmware over the in-process link, one benchmark op per tick,
// and reports how many times faster than real time it simulates.
func BenchmarkLockstepInproc(b *testing.B) { benchLockstep(b, false) }

// BenchmarkLockstepDirect is BenchmarkLockstepInproc over the synchronous
// in-process link: the firmware answers inside the rig's Send, so no tick
// waits for a goroutine hand-over.
func BenchmarkLockstepDirect(b *testing.B) { benchLockstep(b, true) }

func benchLockstep(b *testing.B, direct bool) {
	for _, rec := range []bool{false, true} {
		name := "no-record"
		if rec {
			name = "record"
		}
		b.Run(name, func(b *testing.B) {
			n := max(b.N, 100)
			b.ReportAllocs()
			b.ResetTimer()
			mallocs, elapsed := runTicksOver(b, n, rec, direct)
			b.StopTimer()
			sim := float64(n) / DefaultTickHz
			b.ReportMetric(sim/elapsed.Seconds(), "x_realtime")
			b.ReportMetric(float64(mallocs)/float64(n), "mallocs/tick")
		})
	}
}

// BenchmarkPlantTickDemo is the plant's share of a lockstep tick: one
// Model.Step of the demo walker with the reference law computed in
// process, no link, no loop.
func BenchmarkPlantTickDemo(b *testing.B) {
	m, s, _ := demo(b, 0)
	var in plant.Input
	var res plant.TickResult
	g := reference.DefaultGains()
	tau := make([]float64, 2)
	b.ReportAllocs()
	start := s
	for b.Loop() {
		if s.T > 100 {
			s = start
		}
		r := reference.ReadingOf(m, &s)
		reference.Law(&g, &r, tau)
		in.Torque[0], in.Torque[1] = tau[0], tau[1]
		m.Step(&s, &in, 1e-3, &res)
	}
	b.ReportMetric(1e-3/(float64(b.Elapsed().Seconds())/float64(b.N)), "x_realtime")
}

// BenchmarkWallclockInproc measures a 1 kHz wall-clock run against the
// reference firmware over the in-process link: b.N seconds of 1000 ticks
// (use -benchtime=10x for the 10 000 ticks of the latency figures). It
// reports the latency and jitter percentiles and the miss rate.
func BenchmarkWallclockInproc(b *testing.B) {
	ticks := 1000 * b.N
	b.ReportAllocs()
	rep, err := MeasureLatencyInproc(context.Background(), ticks, 1000, referenceFirmware)
	if err != nil {
		b.Fatal(err)
	}
	b.ReportMetric(rep.Latency.P50, "rt_p50_us")
	b.ReportMetric(rep.Latency.P99, "rt_p99_us")
	b.ReportMetric(rep.Latency.Max, "rt_max_us")
	b.ReportMetric(rep.Jitter.P50, "jitter_p50_us")
	b.ReportMetric(rep.Jitter.P99, "jitter_p99_us")
	b.ReportMetric(rep.Jitter.Max, "jitter_max_us")
	b.ReportMetric(100*rep.MissRate, "miss_%")
	b.ReportMetric(rep.MallocsPerTick, "mallocs/tick")
	b.Log("\n" + rep.String())
}

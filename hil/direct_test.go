package hil

import (
	"context"
	"path/filepath"
	"runtime"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/inproc"
	"gaitrig/firmware/reference"
	"gaitrig/record"
)

// directLink is the reference firmware behind the synchronous in-process
// link.
func directLink(tb testing.TB) bridges.Conn {
	tb.Helper()
	fw, err := reference.New(reference.Options{})
	if err != nil {
		tb.Fatal(err)
	}
	return inproc.NewDirect(fw)
}

// TestDirectLinkRunsTheSameAsThePair: the same lockstep run over the
// synchronous link and over the goroutine pair records the same telemetry,
// bit for bit (only the hand-over differs, not the firmware or the plant).
func TestDirectLinkRunsTheSameAsThePair(t *testing.T) {
	hashOf := func(direct bool) string {
		m, s, cfg := timedDemo(t, 3)
		w := newRecord(t, cfg, m, s)
		var conn bridges.Conn
		done := make(chan error, 1)
		if direct {
			conn = directLink(t)
			done <- nil
		} else {
			rig, fw := inproc.Pair()
			conn = rig
			go func() { done <- referenceFirmware(fw) }()
		}
		defer conn.Close()
		res, err := Run(context.Background(), cfg, m, s, conn, w)
		if err != nil {
			t.Fatal(err)
		}
		if res.Summary.Outcome != record.Pass || res.Summary.Ticks != 3000 {
			t.Fatalf("direct=%v: outcome %s after %d ticks (%s)", direct, res.Summary.Outcome, res.Summary.Ticks, res.Summary.Reason)
		}
		select {
		case <-done:
		case <-time.After(10 * time.Second):
			t.Fatal("the firmware did not end")
		}
		return fileHash(t, filepath.Join(w.Dir(), record.TelemetryFile))
	}
	if a, b := hashOf(true), hashOf(false); a != b {
		t.Errorf("telemetry over the direct link %s differs from the pair's %s", a, b)
	}
}

// BenchmarkLockstepDirect is BenchmarkLockstepInproc over the synchronous
// in-process link: the firmware answers inside the rig's Send, so no tick
// waits for a goroutine hand-over.
func BenchmarkLockstepDirect(b *testing.B) {
	for _, rec := range []bool{false, true} {
		name := "no-record"
		if rec {
			name = "record"
		}
		b.Run(name, func(b *testing.B) {
			n := max(b.N, 100)
			m, s, cfg := timedDemo(b, float64(n)/DefaultTickHz)
			conn := directLink(b)
			defer conn.Close()
			var w *record.Writer
			if rec {
				w = newRecord(b, cfg, m, s)
			}
			b.ReportAllocs()
			var before, after runtime.MemStats
			runtime.ReadMemStats(&before)
			b.ResetTimer()
			start := time.Now()
			res, err := Run(context.Background(), cfg, m, s, conn, w)
			elapsed := time.Since(start)
			b.StopTimer()
			runtime.ReadMemStats(&after)
			if err != nil {
				b.Fatal(err)
			}
			if res.Summary.Ticks != int64(n) {
				b.Fatalf("ran %d ticks, want %d (%s)", res.Summary.Ticks, n, res.Summary.Reason)
			}
			b.ReportMetric(float64(n)/DefaultTickHz/elapsed.Seconds(), "x_realtime")
			b.ReportMetric(float64(after.Mallocs-before.Mallocs)/float64(n), "mallocs/tick")
		})
	}
}

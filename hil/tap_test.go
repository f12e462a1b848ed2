package hil

import (
	"context"
	"runtime"
	"slices"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/record"
)

// runTicksTap is runTicksOver (direct link, no record) with a tap whose
// reader polls it every millisecond on a goroutine of its own (more often
// than any viewer needs); tap nil runs without one.
func runTicksTap(tb testing.TB, n int, tap *Tap) (mallocs uint64, elapsed time.Duration, read uint64) {
	tb.Helper()
	m, s, cfg := timedDemo(tb, float64(n)/DefaultTickHz)
	cfg.Tap = tap
	conn, done := lockstepLink(tb, true)
	defer conn.Close()
	var stop atomic.Bool
	var wg sync.WaitGroup
	if tap != nil {
		rd := tap.NewReader()
		wg.Add(1)
		go func() {
			defer wg.Done()
			var snap Snapshot
			for !stop.Load() {
				if ok, _ := rd.Latest(&snap); ok {
					read++
				}
				// A viewer polls a few hundred times a second at most.
				time.Sleep(time.Millisecond)
			}
		}()
	}
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	start := time.Now()
	res, err := Run(context.Background(), cfg, m, s, conn, nil)
	elapsed = time.Since(start)
	runtime.ReadMemStats(&after)
	stop.Store(true)
	wg.Wait()
	if err != nil {
		tb.Fatal(err)
	}
	if res.Summary.Ticks != int64(n) {
		tb.Fatalf("ran %d ticks, want %d", res.Summary.Ticks, n)
	}
	if err := <-done; err != nil {
		tb.Fatal(err)
	}
	return after.Mallocs - before.Mallocs, elapsed, read
}

// A tap adds no allocation per tick, snapshot or not.
func TestTapDoesNotAllocate(t *testing.T) {
	short, _, _ := runTicksTap(t, 1000, NewTap(0, false))
	long, _, read := runTicksTap(t, 4000, NewTap(0, false))
	perTick := (float64(long) - float64(short)) / 3000
	t.Logf("with a tap: %d mallocs for 1000 ticks, %d for 4000 (%d snapshots read): %.4f per tick", short, long, read, perTick)
	if perTick > 0.01 {
		t.Errorf("%.3f allocations per tick with a tap, want 0", perTick)
	}
}

// Every snapshot a reader sees matches the telemetry row of its tick in
// the run folder (an independent path: the CSV writer and reader), the
// snapshots come one interval of simulated time apart, and the last one
// carries the outcome.
func TestTapSnapshotsMatchTelemetry(t *testing.T) {
	m, s, cfg := timedDemo(t, 2)
	tap := NewTap(0.05, false)
	rd := tap.NewReader()
	cfg.Tap = tap
	conn, done := lockstepLink(t, true)
	defer conn.Close()
	w := newRecord(t, cfg, m, s)
	dir := w.Dir()
	var mu sync.Mutex
	var snaps []Snapshot
	var stop atomic.Bool
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		var snap Snapshot
		for {
			last := stop.Load()
			if ok, _ := rd.Latest(&snap); ok {
				mu.Lock()
				snaps = append(snaps, snap)
				mu.Unlock()
			}
			if last {
				return
			}
			time.Sleep(100 * time.Microsecond)
		}
	}()
	res, err := Run(context.Background(), cfg, m, s, conn, w)
	stop.Store(true)
	wg.Wait()
	if err != nil {
		t.Fatal(err)
	}
	if err := <-done; err != nil {
		t.Fatal(err)
	}
	run, err := record.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	tr, err := run.Ticks()
	if err != nil {
		t.Fatal(err)
	}
	var rows []record.Tick
	for tr.Next() {
		rows = append(rows, *tr.Tick())
	}
	if tr.Err() != nil {
		t.Fatal(tr.Err())
	}
	if len(snaps) == 0 {
		t.Fatal("the reader saw no snapshot")
	}
	if made := tap.Made(); made != 41 {
		// 2 s at one snapshot per 0.05 s: ticks 0, 50, …, 1950 give 40, and
		// the final tick one more.
		t.Errorf("the tap made %d snapshots in 2 s at 0.05 s, want 41", made)
	}
	for _, sn := range snaps {
		row := rows[sn.Tick]
		if row.T != sn.T || !slices.Equal(row.Q[:sn.NumQ], sn.Q[:sn.NumQ]) || row.Applied[0] != sn.Applied[0] || row.Feet[0].NormalN != sn.Feet[0].Normal {
			t.Fatalf("snapshot %d (tick %d) differs from its telemetry row: T %v/%v Q0 %v/%v", sn.Seq, sn.Tick, sn.T, row.T, sn.Q[0], row.Q[0])
		}
	}
	last := snaps[len(snaps)-1]
	// A run that reaches its duration gets its outcome after the last
	// tick; the final snapshot still counts every tick.
	if last.Outcome != "" || last.Ticks != uint64(res.Summary.Ticks) || last.Tick != res.Summary.Ticks-1 {
		t.Errorf("last snapshot: outcome %q after %d ticks (tick %d), the run ended %q after %d", last.Outcome, last.Ticks, last.Tick, res.Summary.Outcome, res.Summary.Ticks)
	}
}

// BenchmarkLockstepTap is BenchmarkLockstepDirect without a record, with
// and without a tap drained by a busy reader: the cost of the live view to
// the loop.
func BenchmarkLockstepTap(b *testing.B) {
	for _, with := range []bool{false, true} {
		name := "no-tap"
		if with {
			name = "tap"
		}
		b.Run(name, func(b *testing.B) {
			n := max(b.N, 100)
			var tap *Tap
			if with {
				tap = NewTap(0, false)
			}
			b.ReportAllocs()
			b.ResetTimer()
			mallocs, elapsed, _ := runTicksTap(b, n, tap)
			b.StopTimer()
			b.ReportMetric(float64(n)/DefaultTickHz/elapsed.Seconds(), "x_realtime")
			b.ReportMetric(float64(mallocs)/float64(n), "mallocs/tick")
		})
	}
}

// BenchmarkTapPerTick is the tap's own cost per tick, one op per tick:
// the histogram updates of every tick and, every twentieth tick (a
// snapshot per 1/50 s at 1 kHz), the snapshot copied to two readers.
// Compare with BenchmarkLockstepDirect's ns per tick.
func BenchmarkTapPerTick(b *testing.B) {
	m, s, cfg := timedDemo(b, 1)
	cfg.Tap = NewTap(0, false)
	cfg.Tap.NewReader()
	cfg.Tap.NewReader()
	r, err := newRunner(cfg, m, s, directLink(b), nil)
	if err != nil {
		b.Fatal(err)
	}
	r.pt.latUS = 800
	b.ReportAllocs()
	for b.Loop() {
		r.pt.s.T += r.dt
		r.pt.tick++
		r.tap(virtualPacer{}, time.Time{}, false)
	}
	if cfg.Tap.Made() == 0 {
		b.Fatal("no snapshot made")
	}
}

// A run that ends in the middle of a tick (here a watchdog trip while the
// loop waits for a command that never comes) still leaves its readers the
// last tick stepped: the final snapshot's tick count and outcome are the
// summary's, not those of the last decimated snapshot before the trip.
func TestTapLastSnapshotOnATrip(t *testing.T) {
	cfg, run := shortRun(t, 400)
	cfg.Watchdog = 300 * time.Millisecond
	cfg.pressure = quietHost // a silent firmware on a quiet host: the verdict must not depend on this host's load
	tap := NewTap(0.05, false)
	rd := tap.NewReader()
	cfg.Tap = tap
	// Silent from state 138 on: the last decimated snapshot (one per 50
	// ticks) is at tick 100, the trip comes at tick 137.
	res, _, _ := run(cfg, hooked(func(_ bridges.Conn, seq uint32, _ *protocol.Command) bool { return seq < 138 }, nil))
	if res.Summary.Outcome != record.Tripped {
		t.Fatalf("outcome %s (%s), want a watchdog trip", res.Summary.Outcome, res.Summary.Reason)
	}
	var snap Snapshot
	if ok, _ := rd.Latest(&snap); !ok {
		t.Fatal("the reader has no snapshot")
	}
	if snap.Ticks != uint64(res.Summary.Ticks) || snap.Outcome != res.Summary.Outcome {
		t.Errorf("last snapshot: %d ticks, outcome %q; summary: %d ticks, outcome %q", snap.Ticks, snap.Outcome, res.Summary.Ticks, res.Summary.Outcome)
	}
	if res.Summary.Ticks%50 == 0 {
		t.Fatalf("the trip came at tick %d, a snapshot tick anyway: the test proves nothing", res.Summary.Ticks)
	}
}

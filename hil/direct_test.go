package hil

import (
	"context"
	"path/filepath"
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

// lockstepLink is the reference firmware behind the synchronous link
// (direct) or on its own goroutine over the pair; done yields the
// firmware's end.
func lockstepLink(tb testing.TB, direct bool) (conn bridges.Conn, done chan error) {
	tb.Helper()
	done = make(chan error, 1)
	if direct {
		done <- nil
		return directLink(tb), done
	}
	rig, fw := inproc.Pair()
	go func() { done <- referenceFirmware(fw) }()
	return rig, done
}

// TestDirectLinkRunsTheSameAsThePair: the same lockstep run over the
// synchronous link and over the goroutine pair records the same telemetry,
// bit for bit (only the hand-over differs, not the firmware or the plant).
func TestDirectLinkRunsTheSameAsThePair(t *testing.T) {
	hashOf := func(direct bool) string {
		m, s, cfg := timedDemo(t, 3)
		w := newRecord(t, cfg, m, s)
		conn, done := lockstepLink(t, direct)
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

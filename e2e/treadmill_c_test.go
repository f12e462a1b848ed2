package e2e

import (
	"context"
	"testing"
	"time"

	"gaitrig/bridges/inproc"
	"gaitrig/firmware/reference"
	"gaitrig/hil"
	"gaitrig/internal/retrytest"
	"gaitrig/plant"
	"gaitrig/record"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// TestCFirmwareWalksTheBelt: the example C firmware, compiled with gcc,
// walks the library's treadmill-steady belt over a real pseudo-terminal
// pair, though it ignores the belt place the states now carry, and ends in
// exactly the state the Go reference without its belt term reaches
// in-process (lockstep makes both bit-exact). The watchdog and resend times are
// widened for the reason given at demoRun.
func TestCFirmwareWalksTheBelt(t *testing.T) {
	b := buildC(t)
	sc, err := scenarios.LoadBuiltin("treadmill-steady")
	if err != nil {
		t.Fatal(err)
	}
	cfg, err := rig.FromScenario(sc)
	if err != nil {
		t.Fatal(err)
	}
	cfg.Watchdog, cfg.Resend = 2*time.Second, 200*time.Millisecond
	if cfg.Belt == nil || cfg.Harness == nil {
		t.Fatalf("treadmill-steady has belt %v and harness %v, want both", cfg.Belt, cfg.Harness)
	}
	model, err := rig.NewModel(sc, cfg)
	if err != nil {
		t.Fatal(err)
	}
	initial, err := rig.InitialState(sc, model)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
	defer cancel()

	w := walkOverPty(t, ctx, b.firmware, cfg, model, initial)
	res := w.res
	checkWalk(t, "on the belt over a pty pair", res, w.dir, w.conn, w.fw)
	if n := res.Summary.Alarms[hil.AlarmBeltEndPassed] + res.Summary.Alarms[hil.AlarmHarnessCaught]; n != 0 {
		t.Errorf("the walker left the belt or was caught (%d alarms)", n)
	}

	// The C firmware does not read the belt place (docs/protocol.md
	// section 3.3 lets a board ignore it), so its twin is the Go law with
	// the belt term off.
	goRes := runGoReferenceNoBeltTerm(t, ctx, cfg, model, initial)
	if goRes.Final.Q != res.Final.Q || goRes.Final.V != res.Final.V || goRes.Summary.Ticks != res.Summary.Ticks {
		t.Errorf("final plant state differs between the C firmware over pty and the Go reference in-process:\nC:  q=%v v=%v (%d ticks)\nGo: q=%v v=%v (%d ticks)",
			res.Final.Q, res.Final.V, res.Summary.Ticks, goRes.Final.Q, goRes.Final.V, goRes.Summary.Ticks)
	}
}

// runGoReferenceNoBeltTerm is runGoReference with the reference law's belt
// term off (firmware/reference/belt.go): the law of a board that ignores
// the state's belt place, as the example C firmware does.
func runGoReferenceNoBeltTerm(t *testing.T, ctx context.Context, cfg hil.Config, model *plant.Model, initial plant.State) hil.Result {
	t.Helper()
	g := reference.DefaultGains()
	g.Belt = reference.BeltGains{}
	return retrytest.UntilValid(t, "the Go reference in-process without its belt term", func(int) (hil.Result, record.Summary) {
		rigEnd, fwEnd := inproc.Pair()
		served := make(chan error, 1)
		go func() { served <- reference.Serve(fwEnd, reference.Options{Gains: &g}) }()
		goRes, _ := runLoop(t, ctx, cfg, model, initial, rigEnd, "inproc")
		rigEnd.Close()
		if err := <-served; err != nil {
			t.Errorf("the Go reference firmware ended with %v", err)
		}
		return goRes, goRes.Summary
	})
}

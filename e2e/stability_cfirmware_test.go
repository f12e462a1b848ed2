package e2e

import (
	"context"
	"math"
	"testing"
	"time"

	"gaitrig/batch"
	"gaitrig/bridges/serial"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// TestStabilityOfTheCFirmware runs `gaitrig stability`'s estimate against
// the example C firmware, compiled with gcc and running as its own process
// on a real pty pair, reached through a link kind registered for the test.
// The C law is bit-identical to the Go reference law and lockstep runs are
// deterministic, so the estimate must equal the built-in firmware's.
func TestStabilityOfTheCFirmware(t *testing.T) {
	if testing.Short() {
		t.Skip("a lockstep walk of about 90 steps over a pty")
	}
	b := buildC(t)
	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
	defer cancel()
	rig.RegisterLinkKind(rig.LinkKind{
		Name: "c-firmware-test", Syntax: "c-firmware-test", Help: "test kind: the example C firmware on a new pty",
		Parse: func(s string) (rig.Link, bool, error) {
			return rig.Link{Kind: "c-firmware-test"}, s == "c-firmware-test", nil
		},
		Dial: func(d rig.DialSetup) (rig.Opened, error) {
			p := openPty(t)
			startFirmware(t, ctx, b.firmware, p.Path)
			conn := serial.NewConn(p.Master, "pty "+p.Path, serial.Config{})
			return rig.Opened{Conn: conn, Name: "C firmware over pty " + p.Path, Close: func() { conn.Close() }}, nil
		},
	})
	base, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	// The watchdog of the loop's own C firmware runs (demoRun): a shared
	// host must not trip a lockstep run that waits on another process.
	sc, err := batch.Derive(base, "level-demo-c", "watchdog 2 s for a firmware process on a shared host", func(s *scenarios.Scenario) {
		s.WatchdogMS = 2000
	})
	if err != nil {
		t.Fatal(err)
	}
	c, err := batch.Stability{Dir: t.TempDir(), Link: "c-firmware-test", PushNs: -1, StepDownM: -1}.Run(ctx, sc)
	if err != nil {
		t.Fatal(err)
	}
	g, err := batch.Stability{Dir: t.TempDir(), Link: "builtin", PushNs: -1, StepDownM: -1}.Run(ctx, sc)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("C firmware: radius %.6f, residual %.3g, %d pairs; Go: radius %.6f", c.SpectralRadius, c.Residual, c.Pairs, g.SpectralRadius)
	if c.Pairs != g.Pairs || len(c.Eigenvalues) != len(g.Eigenvalues) {
		t.Fatalf("C: %d pairs, %d eigenvalues; Go: %d, %d", c.Pairs, len(c.Eigenvalues), g.Pairs, len(g.Eigenvalues))
	}
	for i := range c.Eigenvalues {
		if math.Abs(c.Eigenvalues[i].Re-g.Eigenvalues[i].Re) > 1e-9 || math.Abs(c.Eigenvalues[i].Im-g.Eigenvalues[i].Im) > 1e-9 {
			t.Errorf("eigenvalue %d: C %+v, Go %+v", i, c.Eigenvalues[i], g.Eigenvalues[i])
		}
	}

	// The margin search against the C firmware, one process per run (the
	// scheduler runs a link that is not in-process one run at a time),
	// must find the limit the built-in firmware has.
	cm, err := batch.Margins{Dir: t.TempDir(), Link: "c-firmware-test", Jobs: 2}.Search(ctx, sc, []string{"slope_up"})
	if err != nil {
		t.Fatal(err)
	}
	gm, err := batch.Margins{Dir: t.TempDir(), Link: "builtin", Jobs: 2}.Search(ctx, sc, []string{"slope_up"})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("slope up: C firmware %g °, Go %g °", cm[0].Limit, gm[0].Limit)
	if cm[0].Limit != gm[0].Limit || cm[0].Error != "" || !cm[0].Reached {
		t.Errorf("slope_up: C %+v, Go %+v", cm[0], gm[0])
	}
}

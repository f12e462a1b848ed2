package e2e

import (
	"context"
	"os/exec"
	"testing"
	"time"

	"gaitrig/bridges/inproc"
	"gaitrig/bridges/serial"
	"gaitrig/firmware/reference"
	"gaitrig/hil"
	"gaitrig/internal/retrytest"
	"gaitrig/record"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// TestCFirmwareWalksTheKneedWalker: the example C firmware, started with
// -j 4, takes the level-kneed walker's four joints (hips and actuated
// knees), drives the hips and leaves the knees passive; over a real pty
// pair in lockstep it walks the scenario's steps. The Go reference with its
// knee gains zeroed (the same hips, zero knee torque) must end in exactly
// the same plant state.
func TestCFirmwareWalksTheKneedWalker(t *testing.T) {
	b := buildC(t)
	sc, err := scenarios.LoadBuiltin("level-kneed")
	if err != nil {
		t.Fatal(err)
	}
	cfg, err := rig.FromScenario(sc)
	if err != nil {
		t.Fatal(err)
	}
	// Widened for the reason given at demoRun: a loaded host must not make
	// the watchdog judge a firmware process it starved.
	cfg.Watchdog, cfg.Resend = 2*time.Second, 200*time.Millisecond
	model, err := rig.NewModel(sc, cfg)
	if err != nil {
		t.Fatal(err)
	}
	if got := model.JointNames(); len(got) != 4 {
		t.Fatalf("level-kneed has joints %v, want hips and knees", got)
	}
	initial, err := rig.InitialState(sc, model)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
	defer cancel()

	type walk struct {
		res hil.Result
		fw  *firmwareProc
	}
	w := retrytest.UntilValid(t, "the C firmware with -j 4 over a pty pair", func(int) (walk, record.Summary) {
		p := openPty(t)
		fw := &firmwareProc{stderr: &syncBuffer{}, done: make(chan struct{})}
		fw.cmd = exec.CommandContext(ctx, b.firmware, "-j", "4", "--once", p.Path)
		fw.cmd.Stderr = fw.stderr
		fw.cmd.WaitDelay = 2 * time.Second
		if err := fw.cmd.Start(); err != nil {
			t.Fatalf("starting the C firmware: %v", err)
		}
		go func() { fw.err = fw.cmd.Wait(); close(fw.done) }()
		t.Cleanup(func() {
			select {
			case <-fw.done:
			default:
				_ = fw.cmd.Process.Kill()
				<-fw.done
			}
			if t.Failed() {
				t.Logf("C firmware stderr:\n%s", fw.stderr.String())
			}
		})
		conn := serial.NewConn(p.Master, "pty "+p.Path, serial.Config{})
		t.Cleanup(func() { conn.Close() })
		res, _ := runLoop(t, ctx, cfg, model, initial, conn, "serial "+p.Path)
		return walk{res: res, fw: fw}, res.Summary
	})
	res := w.res
	sum := res.Summary
	if code := w.fw.wait(t, 10*time.Second); code != 0 {
		t.Errorf("the C firmware exited %d after the rig's stop, want 0", code)
	}
	if res.Greeting.Actuators != 4 {
		t.Errorf("greeting announced %d actuators, want 4", res.Greeting.Actuators)
	}
	if sum.Outcome != record.Pass || sum.Steps < sc.Pass.MinSteps {
		t.Fatalf("outcome %s (%s), %d steps; want pass with %d", sum.Outcome, sum.Reason, sum.Steps, sc.Pass.MinSteps)
	}
	if res.Link.BadFrames != 0 || res.Link.BadTorques != 0 {
		t.Errorf("the loop rejected %d frames and %d commands' torques", res.Link.BadFrames, res.Link.BadTorques)
	}

	g := reference.DefaultGains()
	g.Knee = reference.KneeGains{} // passive knees, as the C firmware leaves them
	goRes := retrytest.UntilValid(t, "the Go reference with passive knees", func(int) (hil.Result, record.Summary) {
		rigEnd, fwEnd := inproc.Pair()
		served := make(chan error, 1)
		go func() { served <- reference.Serve(fwEnd, reference.Options{Actuators: 4, Gains: &g}) }()
		r, _ := runLoop(t, ctx, cfg, model, initial, rigEnd, "inproc")
		rigEnd.Close()
		if err := <-served; err != nil {
			t.Errorf("the Go reference firmware ended with %v", err)
		}
		return r, r.Summary
	})
	if goRes.Final.Q != res.Final.Q || goRes.Final.V != res.Final.V || goRes.Summary.Ticks != res.Summary.Ticks {
		t.Errorf("final state differs:\nC:  q=%v v=%v (%d ticks)\nGo: q=%v v=%v (%d ticks)",
			res.Final.Q, res.Final.V, res.Summary.Ticks, goRes.Final.Q, goRes.Final.V, goRes.Summary.Ticks)
	}
	t.Logf("C firmware, passive knees: %s, %d steps in %.1f s simulated", sum.Outcome, sum.Steps, sum.SimTimeS)
}

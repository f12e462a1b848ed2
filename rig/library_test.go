package rig

import (
	"context"
	"errors"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"gaitrig/hil"
	"gaitrig/record"
	"gaitrig/scenarios"
)

// TestEveryBuiltinRuns runs each built-in scenario as `gaitrig run NAME
// --clock lockstep` does, through Run against the built-in reference
// firmware over the link its controller block names, writes its run folder
// and reads it back. In lockstep the outcome does not depend on how busy
// the machine is, so each scenario must pass its own criteria, and the
// folder must agree with the result. A scenario written for the wall clock
// also runs once as written: there the outcome depends on the host, so
// only the record is checked, and that an invalid run names host_stall.
func TestEveryBuiltinRuns(t *testing.T) {
	for _, e := range scenarios.Library() {
		s, err := scenarios.LoadBuiltin(e.Name)
		if err != nil {
			t.Fatal(err)
		}
		t.Run(e.Name, func(t *testing.T) { runBuiltin(t, s, hil.Lockstep) })
		if s.Clock.Mode == scenarios.ClockWallclock {
			t.Run(e.Name+"/as-written", func(t *testing.T) { runBuiltin(t, s, "") })
		}
	}
}

func runBuiltin(t *testing.T, s *scenarios.Scenario, clock hil.ClockMode) {
	dir := filepath.Join(t.TempDir(), s.Name)
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	res, err := Run(ctx, s, Options{RunDir: dir, Clock: clock})
	if err != nil {
		t.Fatal(err)
	}
	sum := res.Summary
	t.Logf("%s: outcome %s, %d steps in %.2f s, mean speed %.3f m/s, peak friction utilization %.3f, min normal force %.1f N, alarms %v",
		s.Name, sum.Outcome, sum.Steps, sum.SimTimeS, sum.MeanSpeedMPS, sum.PeakFrictionUtilization, sum.MinNormalForceN, sum.Alarms)
	var failed []string
	for _, c := range sum.Criteria {
		if !c.Pass {
			failed = append(failed, c.Name)
		}
	}
	lockstep := clock == hil.Lockstep || (clock == "" && s.Clock.Mode == scenarios.ClockLockstep)
	if !lockstep {
		t.Logf("wall clock on this host: outcome %s (%s), failed criteria %v, latency %+v, host stalls %.3f s (longest %.3f s)",
			sum.Outcome, sum.Reason, failed, sum.LatencyUS, sum.HostStallS, sum.LongestHostStallS)
		// On the wall clock the host may spoil a run. A stall of the rig
		// itself must then be said so (invalid with host_stall); a
		// firmware goroutine starved while the rig ran cannot yet be told
		// from a silent firmware, so other outcomes are only logged.
		if sum.Outcome == record.Invalid && sum.Alarms[hil.AlarmHostStall] == 0 {
			t.Fatalf("outcome invalid without a host_stall alarm: %s", sum.Reason)
		}
	} else if sum.Outcome != record.Pass {
		t.Fatalf("outcome %s (%s); failed criteria %v", sum.Outcome, sum.Reason, failed)
	}
	if lockstep && sum.Steps < s.Pass.MinSteps {
		t.Errorf("%d steps, want at least %d", sum.Steps, s.Pass.MinSteps)
	}
	if res.Dir != dir {
		t.Errorf("run folder %s, asked for %s", res.Dir, dir)
	}
	run, err := record.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	if run.Summary == nil || run.Summary.Outcome != sum.Outcome || len(run.Steps) != sum.Steps || len(run.Notes) != 0 {
		t.Errorf("run folder does not match the result: summary %+v, %d steps, notes %v", run.Summary, len(run.Steps), run.Notes)
	}
	ticks, truncated, err := run.AllTicks()
	if err != nil || truncated || int64(len(ticks)) != sum.Ticks {
		t.Errorf("telemetry: %d rows (truncated %v, err %v), summary %d ticks", len(ticks), truncated, err, sum.Ticks)
	}
	if run.Manifest.ScenarioHash != scenarios.Hash(s.Text) || run.Manifest.ScenarioText != string(s.Text) {
		t.Errorf("manifest does not carry the scenario text and its hash")
	}
	wantClock := clock
	if wantClock == "" {
		wantClock = hil.ClockMode(s.Clock.Mode)
	}
	if run.Manifest.Clock != string(wantClock) {
		t.Errorf("manifest clock %q, want %q", run.Manifest.Clock, wantClock)
	}
}

// A run folder made from a scenario replays exactly from what it holds:
// the scenario text in the manifest rebuilds model and initial state, the
// telemetry supplies the applied torques and pushes. A changed torque makes
// the replay diverge at its row, and a cut last line is reported.
func TestReplayFromFolder(t *testing.T) {
	s, err := scenarios.LoadBuiltin("push-recovery")
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "run")
	res, err := Run(context.Background(), s, Options{RunDir: dir, MaxSteps: 10})
	if err != nil {
		t.Fatal(err)
	}
	if res.Summary.Steps != 10 {
		t.Fatalf("MaxSteps 10 ran %d steps", res.Summary.Steps)
	}
	r, err := Replay(dir)
	if err != nil {
		t.Fatal(err)
	}
	if !r.Match || int64(r.Ticks) != res.Summary.Ticks || r.Truncated {
		t.Fatalf("%s (run had %d ticks, truncated %v)", r, res.Summary.Ticks, r.Truncated)
	}
	t.Log(r)

	run, err := record.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(dir, record.TelemetryFile)
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(string(data), "\n")
	col := slices.Index(strings.Split(lines[0], ","), "tau_applied_"+run.Manifest.JointNames[0]+"_nm")
	const changed = 500
	if col < 0 {
		t.Fatalf("no applied-torque column for %s in %s", run.Manifest.JointNames[0], lines[0])
	}
	fields := strings.Split(lines[1+changed], ",")
	v, err := strconv.ParseFloat(fields[col], 64)
	if err != nil {
		t.Fatalf("torque column %d of row %d: %v", col, changed, err)
	}
	fields[col] = strconv.FormatFloat(v+1e-3, 'g', -1, 64)
	lines[1+changed] = strings.Join(fields, ",")
	if err := os.WriteFile(path, []byte(strings.Join(lines, "\n")+"6035,6.0"), 0o644); err != nil {
		t.Fatal(err)
	}
	r, err = Replay(dir)
	if err != nil {
		t.Fatal(err)
	}
	if r.Match || r.FirstDivergence != changed || int64(r.Ticks) != res.Summary.Ticks || !r.Truncated {
		t.Fatalf("after changing row %d: %s (ticks %d of %d, truncated %v)", changed, r, r.Ticks, res.Summary.Ticks, r.Truncated)
	}

	// A folder that is not a run is a configuration error, not a divergence.
	if _, err := Replay(t.TempDir()); !errors.Is(err, ErrConfig) {
		t.Errorf("replay of an empty folder: %v, want a configuration error", err)
	}
}

// A scenario that starts from its natural gait replays too: the initial
// state is found again by the gait finder and must equal the manifest's
// bit for bit.
func TestReplayNaturalGait(t *testing.T) {
	var s *scenarios.Scenario
	for _, e := range scenarios.Library() {
		sc, err := scenarios.LoadBuiltin(e.Name)
		if err != nil {
			t.Fatal(err)
		}
		if sc.Initial.NaturalGait {
			s = sc
			break
		}
	}
	if s == nil {
		// passive-downhill does; a library without one has lost the
		// scenario this test exists for, which must not pass silently.
		t.Fatal("no built-in scenario starts from its natural gait")
	}
	dir := filepath.Join(t.TempDir(), "run")
	res, err := Run(context.Background(), s, Options{RunDir: dir, MaxSteps: 3})
	if err != nil {
		t.Fatal(err)
	}
	r, err := Replay(dir)
	if err != nil || !r.Match || int64(r.Ticks) != res.Summary.Ticks {
		t.Fatalf("replay of %s: %v, %v (run had %d ticks)", s.Name, r, err, res.Summary.Ticks)
	}
}

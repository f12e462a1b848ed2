package batch

import (
	"context"
	"math"
	"path/filepath"
	"testing"

	"gaitrig/record"

	"gaitrig/scenarios"
)

// TestBatteryForTreadmill: a treadmill scenario's battery is the fixed
// battery plus the belt speed-up and slow-down checks, whose variants carry
// one more step-timed pulse of the documented size on the belt and load
// back; a scenario on fixed ground keeps the fixed battery.
func TestBatteryForTreadmill(t *testing.T) {
	level, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	if got, want := len(BatteryFor(level)), len(Battery()); got != want {
		t.Errorf("fixed ground: %d checks, want the battery's %d", got, want)
	}
	belt, err := scenarios.LoadBuiltin("treadmill-steady")
	if err != nil {
		t.Fatal(err)
	}
	checks := BatteryFor(belt)
	if len(checks) != len(Battery())+2 {
		t.Fatalf("treadmill: %d checks, want %d", len(checks), len(Battery())+2)
	}
	vs, err := Preflight{Checks: checks}.Variants(belt)
	if err != nil {
		t.Fatal(err)
	}
	for i, sign := range []float64{1, -1} {
		v := vs[len(vs)-2+i]
		b := v.Terrain.Segments[1].Belt
		if len(b.Pulses) != 1 {
			t.Fatalf("%s: %d pulses, want 1", v.Name, len(b.Pulses))
		}
		p := b.Pulses[0]
		if p.AtStep != PreflightBeltStep || p.Phase != PreflightBeltPhase || p.DeltaMPS != sign*PreflightBeltDelta || p.RiseS != PreflightBeltRise || p.FallS != PreflightBeltRise {
			t.Errorf("%s: pulse %+v", v.Name, p)
		}
		back, err := scenarios.Parse(v.Name+".yaml", v.Text)
		if err != nil {
			t.Fatalf("%s does not load back: %v", v.Name, err)
		}
		if len(back.Terrain.Segments[1].Belt.Pulses) != 1 {
			t.Errorf("%s loaded back with pulses %+v", v.Name, back.Terrain.Segments[1].Belt.Pulses)
		}
	}
	if len(belt.Terrain.Segments[1].Belt.Pulses) != 0 {
		t.Errorf("the base scenario was changed: %+v", belt.Terrain.Segments[1].Belt.Pulses)
	}
}

// TestBeltTermPreflight: the built-in firmware passes the whole treadmill
// battery of treadmill-steady (GO), which it did not before its belt term
// (the uphill and downhill checks drifted off the middle of the belt until
// the harness rope went taut). The verdict is checked against the runs on
// disk: every summary passes, and on every check the hip stayed within
// 0.8 m of the middle of the 4 m belt, inside the rope's slack (the rope of
// length 2.2 m hung 2 m above the start goes taut √(2.2² − 2²) ≈ 0.92 m
// away).
func TestBeltTermPreflight(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the nine checks of the treadmill battery; skipped with -short")
	}
	base, err := scenarios.LoadBuiltin("treadmill-steady")
	if err != nil {
		t.Fatal(err)
	}
	p := Preflight{Dir: t.TempDir(), Link: "builtin", Jobs: 2, Checks: BatteryFor(base)}
	variants, err := p.Variants(base)
	if err != nil {
		t.Fatal(err)
	}
	res, err := p.Run(context.Background(), variants)
	if err != nil {
		t.Fatal(err)
	}
	allPass := true
	for _, c := range res.Checks {
		if c.Err != nil {
			t.Errorf("%s: %v", c.Check.Name, c.Err)
			allPass = false
			continue
		}
		run, err := record.Open(filepath.Join(p.Dir, c.Job.Scenario.Name))
		if err != nil {
			t.Fatal(err)
		}
		if run.Summary.Outcome != record.Pass {
			allPass = false
			t.Errorf("%s: outcome %s (%s)", c.Check.Name, run.Summary.Outcome, run.Summary.Reason)
		}
		ticks, _, err := run.AllTicks()
		if err != nil {
			t.Fatal(err)
		}
		worst := 0.0
		for _, tk := range ticks {
			worst = math.Max(worst, math.Abs(tk.BeltPos-2))
		}
		if !(worst < 0.8) {
			t.Errorf("%s: the hip went %.3g m from the middle of the belt", c.Check.Name, worst)
		}
		t.Logf("%s: furthest from the middle %.3f m", c.Check.Name, worst)
	}
	if res.Go != allPass || !res.Go {
		t.Errorf("verdict GO %v; every check passed: %v", res.Go, allPass)
	}
}

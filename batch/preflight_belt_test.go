package batch

import (
	"testing"

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

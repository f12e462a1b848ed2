package batch

import (
	"context"
	"path/filepath"
	"slices"
	"testing"

	"gaitrig/hil"
	"gaitrig/record"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// TestBeltAxesOnlyOnATreadmill: a search over every axis includes the belt
// axes on a treadmill scenario and leaves them out on fixed ground, where
// asking for one by name is a configuration error. The runner is a stub
// that passes every run: only the choice of axes is tested here.
func TestBeltAxesOnlyOnATreadmill(t *testing.T) {
	pass := func(_ context.Context, s *scenarios.Scenario, o rig.Options) (rig.Result, error) {
		if o.OnStep != nil { // the nominal run's steps time the push axes
			for i := 1; i <= 12; i++ {
				o.OnStep(hil.StepInfo{Index: i, DurationS: 0.5, SimTimeS: 0.5 * float64(i)})
			}
		}
		return rig.Result{Dir: o.RunDir, Summary: record.Summary{Outcome: record.Pass, Steps: 12}}, nil
	}
	axesOf := func(name string, names []string) ([]string, error) {
		sc, err := scenarios.LoadBuiltin(name)
		if err != nil {
			t.Fatal(err)
		}
		res, err := Margins{Dir: t.TempDir(), Runner: pass, Grid: 2}.Search(context.Background(), sc, names)
		var out []string
		for _, am := range res {
			out = append(out, am.Axis)
		}
		return out, err
	}
	level, err := axesOf("level-demo", nil)
	if err != nil {
		t.Fatal(err)
	}
	belt, err := axesOf("treadmill-steady", nil)
	if err != nil {
		t.Fatal(err)
	}
	for _, n := range BeltAxisNames {
		if slices.Contains(level, n) || !slices.Contains(belt, n) {
			t.Errorf("%s: on fixed ground %v, on the belt %v", n, slices.Contains(level, n), slices.Contains(belt, n))
		}
	}
	if len(belt) != len(level)+len(BeltAxisNames) {
		t.Errorf("%d axes on the belt, %d on fixed ground", len(belt), len(level))
	}
	if _, err := axesOf("level-demo", []string{"belt_speed_up"}); err == nil {
		t.Error("a belt axis on fixed ground was accepted")
	}
}

// TestBeltMarginOfTheBuiltInController: the largest belt speed-up and
// slow-down pulse the built-in firmware survives on treadmill-steady. The
// limits are checked against independent runs: the scenario with the
// axis applied at the last passing value, run again through rig.Run,
// passes, and at the first failing value it does not; and the record of
// each shows one belt pulse of that size (the belt_pulse event).
func TestBeltMarginOfTheBuiltInController(t *testing.T) {
	if testing.Short() {
		t.Skip("many lockstep walks")
	}
	sc, err := scenarios.LoadBuiltin("treadmill-steady")
	if err != nil {
		t.Fatal(err)
	}
	axes := BeltAxes()
	res, err := Margins{Dir: t.TempDir(), Jobs: 2}.Run(context.Background(), sc, axes)
	if err != nil {
		t.Fatal(err)
	}
	for i, am := range res {
		t.Logf("%s: limit %g %s (±%g) reached %v; pass %g fail %g", am.Axis, am.Limit, am.Unit, am.Tolerance, am.Reached, am.LastPass.Value, am.FirstFail.Value)
		if am.Error != "" {
			t.Errorf("%s: %s", am.Axis, am.Error)
			continue
		}
		if am.Limit == 0 || am.NotMonotone {
			t.Errorf("%s: limit %g, not monotone %v: the steady belt's firmware should survive a small pulse", am.Axis, am.Limit, am.NotMonotone)
		}
		check := func(v float64, wantPass bool) {
			d, err := Derive(sc, sc.Name+"-"+am.Axis+"-again", "independent rerun", func(s *scenarios.Scenario) { axes[i].Apply(s, v) })
			if err != nil {
				t.Fatal(err)
			}
			dir := filepath.Join(t.TempDir(), d.Name)
			r, err := rig.Run(context.Background(), d, rig.Options{RunDir: dir})
			if err != nil {
				t.Fatal(err)
			}
			if (r.Summary.Outcome == record.Pass) != wantPass {
				t.Errorf("%s at %g m/s: rerun outcome %s (%s), want pass %v", am.Axis, v, r.Summary.Outcome, r.Summary.Reason, wantPass)
			}
			run, err := record.Open(dir)
			if err != nil {
				t.Fatal(err)
			}
			var deltas []float64
			for _, e := range run.Events {
				if e.Kind == "belt_pulse" {
					deltas = append(deltas, e.Values["delta_mps"])
				}
			}
			if wantPass && (len(deltas) != 1 || deltas[0] != v) {
				t.Errorf("%s at %g m/s: belt pulses %v in the record", am.Axis, v, deltas)
			}
		}
		check(am.LastPass.Value, true)
		if am.Reached {
			check(am.FirstFail.Value, false)
		}
	}
}

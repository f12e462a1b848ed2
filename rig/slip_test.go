package rig

import (
	"context"
	"errors"
	"path/filepath"
	"strings"
	"testing"

	"gaitrig/hil"
	"gaitrig/record"
	"gaitrig/scenarios"
)

// A slip is what the friction figures exist to show. On the low-friction
// patch three heel strikes slip (impact_slip, warn). Checked against the
// event log, an independent account of the same slips (the plant's event
// values, the impulse ratio and μ_s): the summary's peak utilization is at
// least 1 and at least every slip's impulse ratio over μ_s; the telemetry
// flags the slipping foot at each slip's tick and shows at least that
// demand there; and the step holding each slip has a peak of at least 1.
func TestSlipsShowInTheFrictionFigures(t *testing.T) {
	s, err := scenarios.LoadBuiltin("low-friction-patch")
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "run")
	res, err := Run(context.Background(), s, Options{RunDir: dir, Clock: hil.Lockstep})
	if err != nil {
		t.Fatal(err)
	}
	run, err := record.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	var slips []record.Event
	for _, e := range run.Events {
		if e.Kind == hil.AlarmImpactSlip {
			slips = append(slips, e)
		}
	}
	if len(slips) != 3 || res.Summary.Alarms[hil.AlarmImpactSlip] != 3 {
		t.Fatalf("%d impact_slip events, %d counted; the scenario slips three times", len(slips), res.Summary.Alarms[hil.AlarmImpactSlip])
	}
	ticks, _, err := run.AllTicks()
	if err != nil {
		t.Fatal(err)
	}
	peak := run.Summary.PeakFrictionUtilization
	if !(peak >= 1) {
		t.Errorf("peak friction utilization %g with three slips; a slip counts as at least 1", peak)
	}
	for _, e := range slips {
		want := e.Values["value"] / e.Values["limit"]
		if !(want > 1) {
			t.Fatalf("slip at tick %d: impulse ratio %g over μ_s %g is not beyond the cone", e.Tick, e.Values["value"], e.Values["limit"])
		}
		if peak < want {
			t.Errorf("peak %g below the slip's demand %g at tick %d", peak, want, e.Tick)
		}
		k := 0
		if e.Foot == "right" {
			k = 1
		}
		row := ticks[e.Tick]
		if row.Index != e.Tick || !row.Feet[k].Slip || row.Feet[k].Utilization < want {
			t.Errorf("tick %d, %s foot: slip flag %v, utilization %g; want the flag and at least %g",
				e.Tick, e.Foot, row.Feet[k].Slip, row.Feet[k].Utilization, want)
		}
		found := false
		for _, st := range run.Steps {
			if e.T >= st.StartS && e.T <= st.EndS {
				found = true
				if st.PeakUtilization < 1 {
					t.Errorf("step %d holds the slip at %.3f s but its peak utilization is %g", st.Index, e.T, st.PeakUtilization)
				}
			}
		}
		if !found {
			t.Errorf("no step holds the slip at %.3f s", e.T)
		}
	}
}

// A run that never started (prepared, then closed before its first tick,
// as an interrupted or refused run is) leaves a folder with no rows.
// Replaying it compares nothing, which is not a match: Replay says so with
// an error the command line turns into a non-zero exit.
func TestReplayOfARunThatNeverStarted(t *testing.T) {
	s, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "run")
	p, err := Prepare(context.Background(), s, Options{RunDir: dir, Clock: hil.Lockstep})
	if err != nil {
		t.Fatal(err)
	}
	p.Close()
	r, err := Replay(dir)
	if !errors.Is(err, ErrNothingToReplay) || !errors.Is(err, ErrConfig) || r.Match {
		t.Fatalf("replay of a run with no ticks: %+v, err %v; want ErrNothingToReplay and no match", r, err)
	}
	if !strings.Contains(err.Error(), "aborted") {
		t.Errorf("error %q does not say how the run ended", err)
	}
}

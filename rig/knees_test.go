package rig

import (
	"context"
	"math"
	"path/filepath"
	"strings"
	"testing"

	"gaitrig/hil"
	"gaitrig/plant"
	"gaitrig/record"
	"gaitrig/scenarios"
)

// TestKneedRunRecordsKnees runs the passive kneed walker and reads its run
// folder back: the knee columns are there under the names of a kneed
// walker (thigh and shank, never torso), the derived knee angle is the
// shank angle less the thigh angle, the summary's least knee-lock torque
// equals the least lock torque of a locked knee on the ground found again
// from the telemetry rows, and the folder replays exactly.
func TestKneedRunRecordsKnees(t *testing.T) {
	s, err := scenarios.LoadBuiltin("passive-kneed-downhill")
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "run")
	res, err := Run(context.Background(), s, Options{RunDir: dir, MaxSteps: 6})
	if err != nil {
		t.Fatal(err)
	}
	if res.Summary.Steps != 6 {
		t.Fatalf("%d steps, want 6 (%s)", res.Summary.Steps, res.Summary.Reason)
	}
	run, err := record.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	head := strings.Join(run.Manifest.Columns, ",")
	for _, want := range []string{"theta_thigh_left_rad", "theta_shank_right_rad", "omega_shank_left_radps", "theta_knee_left_rad",
		"omega_knee_right_radps", "knee_locked_left", "knee_lock_torque_right_nm"} {
		if !strings.Contains(head, want) {
			t.Errorf("no column %s in %s", want, head)
		}
	}
	if strings.Contains(head, "torso") {
		t.Errorf("a walker without a torso has torso columns: %s", head)
	}
	ticks, truncated, err := run.AllTicks()
	if err != nil || truncated {
		t.Fatalf("telemetry: %v (truncated %v)", err, truncated)
	}
	least := math.Inf(1)
	unlocked := 0
	for _, r := range ticks {
		for i := 0; i < 2; i++ {
			f := r.Feet[i]
			if f.Mode != int(plant.Free) && f.KneeLocked {
				least = math.Min(least, f.KneeTorqueNM)
			}
			if !f.KneeLocked {
				unlocked++
				if f.KneeTorqueNM != 0 {
					t.Fatalf("tick %d: unlocked %s knee with lock torque %g", r.Index, record.FootNames[i], f.KneeTorqueNM)
				}
			}
		}
	}
	if unlocked == 0 {
		t.Error("no tick with an unlocked knee: the swing knees never flexed")
	}
	got := run.Summary.MinKneeLockTorqueNM
	if got == nil || *got != least {
		t.Fatalf("summary min_knee_lock_torque_nm %v, the telemetry gives %g", got, least)
	}
	t.Logf("least knee-lock torque of a stance knee: %.4g N·m over %d ticks", least, len(ticks))
	r, err := Replay(dir)
	if err != nil || !r.Match {
		t.Fatalf("replay: %v, %v", r, err)
	}
}

// TestKneeBuckleAlarm takes the latches off the passive kneed walker: its
// stance knee, held by the one-sided stop only, buckles early in stance
// (the ground force passes behind the knee), and the run shows the
// knee_buckle alarm and a negative least lock torque is never recorded
// (the stop cannot pull).
func TestKneeBuckleAlarm(t *testing.T) {
	text, err := scenarios.BuiltinText("passive-kneed-downhill")
	if err != nil {
		t.Fatal(err)
	}
	mod := strings.Replace(string(text), "knee_latch: true", "knee_latch: false", 1)
	if mod == string(text) {
		t.Fatal("the scenario has no knee_latch: true to take off")
	}
	s, err := scenarios.Parse("unlatched.yaml", []byte(mod))
	if err != nil {
		t.Fatal(err)
	}
	res, err := Run(context.Background(), s, Options{RunDir: filepath.Join(t.TempDir(), "run"), MaxSteps: 6})
	if err != nil {
		t.Fatal(err)
	}
	sum := res.Summary
	if sum.Alarms[hil.AlarmKneeBuckle] == 0 {
		t.Fatalf("no knee_buckle alarm: outcome %s (%s), alarms %v", sum.Outcome, sum.Reason, sum.Alarms)
	}
	if m := sum.MinKneeLockTorqueNM; m != nil && *m < 0 {
		t.Errorf("a knee without a latch recorded a pulling lock torque %g N·m", *m)
	}
	t.Logf("outcome %s (%s), alarms %v", sum.Outcome, sum.Reason, sum.Alarms)
}

// TestKneedNaturalGait: a kneed scenario that asks for its natural gait
// gets the gait finder's period-one gait, and it is the one the built-in
// scenario states explicitly (found by Newton's method on the step map
// and rounded to 6 digits in the YAML).
func TestKneedNaturalGait(t *testing.T) {
	text, err := scenarios.BuiltinText("passive-kneed-downhill")
	if err != nil {
		t.Fatal(err)
	}
	explicit, err := scenarios.Parse("explicit.yaml", text)
	if err != nil {
		t.Fatal(err)
	}
	mod := strings.Replace(string(text), "  stance: left\n", "  stance: left\n  natural_gait: true\n", 1)
	s, err := scenarios.Parse("natural.yaml", []byte(mod))
	if err != nil {
		t.Fatal(err)
	}
	m, err := plant.New(mustParams(t, s), s.PlantOptions())
	if err != nil {
		t.Fatal(err)
	}
	st, err := InitialState(s, m)
	if err != nil {
		t.Fatalf("natural gait of a kneed walker: %v", err)
	}
	want, err := InitialState(explicit, m)
	if err != nil {
		t.Fatal(err)
	}
	if st.Mode[st.Stance] == plant.Free {
		t.Errorf("natural gait state has its stance foot in the air: %+v", st)
	}
	for i := 0; i < m.NumLinks(); i++ {
		if d := math.Abs(st.Q[2+i] - want.Q[2+i]); d > 2e-6 {
			t.Errorf("link %d angle: natural gait %.7f, scenario's explicit %.7f", i, st.Q[2+i], want.Q[2+i])
		}
		if d := math.Abs(st.V[2+i] - want.V[2+i]); d > 2e-5 {
			t.Errorf("link %d rate: natural gait %.7f, scenario's explicit %.7f", i, st.V[2+i], want.V[2+i])
		}
	}
}

func mustParams(t *testing.T, s *scenarios.Scenario) plant.Params {
	t.Helper()
	p, err := s.PlantParams()
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// TestLevelKneedTripsOnAScuff: the level-kneed scenario trips on a scuff,
// so its passing run shows the swing knee clearing the foot. With the
// swing knee extended too early (knee_extend_lead_rad 0.3: straight again
// while the thigh is still well behind) the foot scuffs mid-swing and the
// run trips with foot_scuff.
func TestLevelKneedTripsOnAScuff(t *testing.T) {
	text, err := scenarios.BuiltinText("level-kneed")
	if err != nil {
		t.Fatal(err)
	}
	mod := strings.Replace(string(text), "  mode: walk\n", "  mode: walk\n  settings:\n    knee_extend_lead_rad: 0.3\n", 1)
	s, err := scenarios.Parse("straight-knee.yaml", []byte(mod))
	if err != nil {
		t.Fatal(err)
	}
	res, err := Run(context.Background(), s, Options{RunDir: filepath.Join(t.TempDir(), "run"), MaxSteps: 10})
	if err != nil {
		t.Fatal(err)
	}
	if sum := res.Summary; sum.Outcome != record.Tripped || sum.Alarms[hil.AlarmFootScuff] == 0 {
		t.Fatalf("outcome %s (%s), alarms %v: want tripped on foot_scuff", sum.Outcome, sum.Reason, sum.Alarms)
	}
}

package rig

import (
	"context"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"gaitrig/hil"
	"gaitrig/record"
	"gaitrig/report"
	"gaitrig/scenarios"
)

// runFolder runs a scenario in lockstep against the built-in reference
// firmware and opens its run folder.
func runFolder(t *testing.T, s *scenarios.Scenario) (Result, *record.Run, []record.Tick) {
	t.Helper()
	dir := filepath.Join(t.TempDir(), s.Name)
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	res, err := Run(ctx, s, Options{RunDir: dir, Clock: hil.Lockstep})
	if err != nil {
		t.Fatal(err)
	}
	run, err := record.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	ticks, trunc, err := run.AllTicks()
	if err != nil || trunc {
		t.Fatalf("telemetry: %v (truncated %v)", err, trunc)
	}
	return res, run, ticks
}

// variant parses a built-in scenario's text with edits applied (each a
// pair old, new of exact text), so a test changes one thing and keeps
// the rest of the file.
func variant(t *testing.T, name string, edits ...string) *scenarios.Scenario {
	t.Helper()
	s, err := scenarios.LoadBuiltin(name)
	if err != nil {
		t.Fatal(err)
	}
	text := string(s.Text)
	for i := 0; i+1 < len(edits); i += 2 {
		if !strings.Contains(text, edits[i]) {
			t.Fatalf("%s has no %q to edit", name, edits[i])
		}
		text = strings.Replace(text, edits[i], edits[i+1], 1)
	}
	v, err := scenarios.Parse(name+"-variant.yaml", []byte(text))
	if err != nil {
		t.Fatal(err)
	}
	return v
}

// TestTreadmillSteadyIsLevelWalking: Galilean invariance through the whole
// loop. treadmill-steady is level-demo (same walker, controller and state
// relative to the ground) on a belt at a constant 0.78 m/s, so relative to
// the belt its motion must be level-demo's. The plant alone agrees to
// 1e-9 (plant/belt_test.go); through the loop the readings travel as
// float32 (docs/protocol.md), so a rounding-level difference of the two
// runs can flip the last bit of a reading and the firmware's torque with
// it, and the gait's phase is neutrally stable, so such differences add
// up as a small time shift. Seen: 1e-15 after 1 s, 1e-9 after 5 s, then
// jumps to about 1e-4 (m, rad) by 14 s, which is what discrete flips do.
// A time shift that moves a heel strike across a tick boundary makes one
// tick's velocities and forces jump (and, one tick later, positions
// differ by that tick's velocity jump, about 1 rad/s × 1 ms), so the ticks
// compare positions to 1e-2 m and rad, and the steps compare what the
// step table says of forces and timing (duration, length on the belt,
// peak utilization, least normal force) to 1e-2 relative: far below
// anything a firmware engineer reads off a plot, and far from what a wrong
// belt gives (a sign error moves the walker metres).
func TestTreadmillSteadyIsLevelWalking(t *testing.T) {
	level, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	// The firmware's belt term (firmware/reference/belt.go) reads the
	// place on the belt, which level ground does not have: turned off, the
	// firmware reads the same numbers on both, which is what invariance
	// needs. TestBeltTermHoldsPlace runs the belt with the term on.
	belt := variant(t, "treadmill-steady", "  mode: walk\n", "  mode: walk\n  settings:\n    belt_gain: 0\n")
	speed := *belt.Terrain.Segments[1].Belt.SpeedMPS
	rl, runL, tl := runFolder(t, level)
	rb, runB, tb := runFolder(t, belt)
	sl, sb := runL.Steps, runB.Steps
	if rl.Summary.Steps != rb.Summary.Steps || len(tl) != len(tb) || len(sl) != len(sb) {
		t.Fatalf("level: %d steps, %d ticks; belt: %d steps, %d ticks", rl.Summary.Steps, len(tl), rb.Summary.Steps, len(tb))
	}
	worst := 0.0
	for k := range tl {
		a, b := &tl[k], &tb[k]
		d := math.Abs(b.Q[0] + speed*b.T - a.Q[0]) // the belt carried the walker back by speed·t
		for i := 1; i < 5; i++ {
			d = math.Max(d, math.Abs(b.Q[i]-a.Q[i]))
		}
		worst = math.Max(worst, d)
		if d > 1e-2 {
			t.Fatalf("tick %d (t = %.3f s): position relative to the belt differs by %.3g", k, a.T, d)
		}
		if b.BeltSpeed != speed {
			t.Fatalf("tick %d: belt speed column %g, want %g", k, b.BeltSpeed, speed)
		}
	}
	worstStep := 0.0
	for i := range sl {
		a, b := &sl[i], &sb[i]
		for _, p := range [][2]float64{{a.DurationS, b.DurationS}, {a.LengthM, b.LengthM},
			{a.PeakUtilization, b.PeakUtilization}, {a.MinNormalN, b.MinNormalN}} {
			r := math.Abs(p[1]-p[0]) / math.Max(math.Abs(p[0]), 1e-3)
			worstStep = math.Max(worstStep, r)
			if r > 1e-2 {
				t.Fatalf("step %d: level %+v, on the belt %+v", a.Index, *a, *b)
			}
		}
	}
	t.Logf("%d ticks: largest position difference relative to the belt %.3g (m, rad); steps differ by %.3g relative at most; mean speed level %.6f, on the belt %.6f m/s",
		len(tl), worst, worstStep, rl.Summary.MeanSpeedMPS, rb.Summary.MeanSpeedMPS)
	if math.Abs(rl.Summary.MeanSpeedMPS-rb.Summary.MeanSpeedMPS) > 1e-4 {
		t.Errorf("mean speed on the belt %g, on level ground %g: steps must be measured on the belt", rb.Summary.MeanSpeedMPS, rl.Summary.MeanSpeedMPS)
	}
}

// TestBeltPulseRaisesFrictionAlarm: a belt speed-up of 2 m/s in 50 ms at
// early stance of step 10, back in another 50 ms (belt acceleration
// ±40 m/s²: in the belt's frame the walker feels an inertial force of
// about four times its weight, d'Alembert) raises friction_limit during
// the pulse and not before, while the gentle pulses of treadmill-pulses
// (in the library test) raise none. A walker is not a rigid block: most
// of a pivot's acceleration turns into rotation, which is why a 1.5 m/s
// in 0.1 s pulse still passes (seen while writing this test). The
// telemetry agrees: the stance foot's utilization is below 1 up to the
// alarm, the belt speed column rises with the programmed slope, and the
// alarm time lies inside the pulse the loop logged.
func TestBeltPulseRaisesFrictionAlarm(t *testing.T) {
	s := variant(t, "treadmill-pulses",
		"{at_step: 10, phase: 0.1, delta_mps: 0.3, rise_s: 0.15, hold_s: 0, fall_s: 0.15}",
		"{at_step: 10, phase: 0.1, delta_mps: 2.0, rise_s: 0.05, hold_s: 0, fall_s: 0.05}")
	res, run, ticks := runFolder(t, s)
	start, alarmT := math.NaN(), math.NaN()
	var alarmTick int64
	for _, e := range run.Events {
		switch e.Kind {
		case "belt_pulse":
			if math.IsNaN(start) {
				start = e.Values["start_s"]
			}
		case hil.AlarmFrictionLimit:
			if math.IsNaN(alarmT) {
				alarmT, alarmTick = e.T, e.Tick
			}
		}
	}
	t.Logf("outcome %s (%s); pulse starts %.4f s, friction alarm at %.4f s", res.Summary.Outcome, res.Summary.Reason, start, alarmT)
	if math.IsNaN(start) || math.IsNaN(alarmT) {
		t.Fatalf("pulse start %g, friction alarm %g: want both", start, alarmT)
	}
	if !(alarmT > start && alarmT <= start+0.1+1e-9) {
		t.Errorf("friction alarm at %.6f s, want inside the pulse (%.6f, %.6f] s", alarmT, start, start+0.1)
	}
	for _, tk := range ticks[:alarmTick] {
		u := tk.Feet[tk.Stance].Utilization
		if tk.Feet[tk.Stance].Mode != 0 && !(u < 1) {
			t.Fatalf("tick %d (t = %.4f s): utilization %g before the alarm", tk.Index, tk.T, u)
		}
	}
	// The belt speed column during the rise: 0.78 + 40·(t − start).
	for _, tk := range ticks[:alarmTick] {
		if tk.T > start+1e-3 && tk.T < start+0.05 {
			if want := 0.78 + 40*(tk.T-start); math.Abs(tk.BeltSpeed-want) > 1e-9 {
				t.Fatalf("t = %.4f s: belt speed %.12g, want %.12g", tk.T, tk.BeltSpeed, want)
			}
		}
	}
}

// TestHarnessCatchesAFall: a compass walker (treadmill-steady without the
// torso, whose passive flop would end the run by the torso-angle limit
// first) with no controller driving it (link none: zero torques, as when
// firmware stops) falls, and the harness catches it: harness_caught ends
// the run (its default severity trips) before any fall alarm, with the
// peak rope force as its value. The feet unload as the rope takes the
// weight, so the slip and lift-off alarms are set to warn and the physics
// to continue. That force is checked against an independent evaluation of the
// documented rope law (tension k·(d − L) + c·ḋ, anchor 2 m above the
// initial hip, L = 2.2 m) from the telemetry: the push columns hold the
// rope's pull over each tick, computed from the state at the tick's start
// (the row before).
func TestHarnessCatchesAFall(t *testing.T) {
	s := variant(t, "treadmill-steady",
		"  torso:\n    mass_kg: 15           # demo value\n    com_m: 0.3            # demo value\n    inertia_kgm2: 0.6     # demo value\n", "",
		"  torso_angle_rad: -0.1   # leaning forward\n", "",
		"  link: builtin\n  mode: walk\n", "  link: none\n",
		"physics:\n", "physics:\n  on_slip: continue\n  on_lift_off: continue\n",
		"pass:\n", "alarms:\n  friction_limit: warn\n  lift_off: warn\npass:\n")
	res, run, ticks := runFolder(t, s)
	if res.Summary.Outcome != record.Tripped || !strings.HasPrefix(res.Summary.Reason, hil.AlarmHarnessCaught) {
		t.Fatalf("outcome %s (%s), want tripped by %s", res.Summary.Outcome, res.Summary.Reason, hil.AlarmHarnessCaught)
	}
	if n := res.Summary.Alarms[hil.AlarmFall]; n != 0 {
		t.Errorf("%d fall alarms: the harness must catch the walker first", n)
	}
	var caught record.Event
	for _, e := range run.Events {
		if e.Kind == hil.AlarmHarnessCaught {
			caught = e
		}
	}
	m := run.Manifest
	anchor := [2]float64{m.InitialQ[0], m.InitialQ[1] + 2}
	const length, k, c = 2.2, hil.DefaultRopeStiffness, hil.DefaultRopeDamping
	peak, prev := 0.0, [4]float64{m.InitialQ[0], m.InitialQ[1], m.InitialV[0], m.InitialV[1]}
	for _, tk := range ticks {
		dx, dy := prev[0]-anchor[0], prev[1]-anchor[1]
		d := math.Hypot(dx, dy)
		want := 0.0
		if d > length {
			want = math.Max(0, k*(d-length)+c*(dx*prev[2]+dy*prev[3])/d)
		}
		if got := math.Hypot(tk.Push[0], tk.Push[1]); math.Abs(got-want) > 1e-9*math.Max(1, want) {
			t.Fatalf("tick %d: rope force %.12g N, the rope law gives %.12g N", tk.Index, got, want)
		}
		peak = math.Max(peak, want)
		prev = [4]float64{tk.Q[0], tk.Q[1], tk.V[0], tk.V[1]}
	}
	const weight = 16 * 9.81 // the compass walker: 10 kg hip, two 3 kg legs
	t.Logf("caught at %.3f s with peak rope force %.1f N (walker weight %.1f N)", caught.T, caught.Values["value"], weight)
	if math.Abs(caught.Values["value"]-peak) > 1e-9*peak || peak < 0.5*weight {
		t.Errorf("harness_caught value %g N, independent peak %g N (a catch takes at least half the weight)", caught.Values["value"], peak)
	}
}

// TestBeltEndAlarms: treadmill-short with the belt slower than the walker
// (0.5 m/s against its 0.78 m/s) lets the walker gain 0.28 m/s on the
// belt: belt_end_near is raised when the hip or a foot comes within the
// 0.25 m margin of the front end, and belt_end_passed trips the run when
// one passes it. Both times are checked against an independent reading
// of the telemetry: the leg ends hip + L(sin θ, −cos θ) (L = 0.9 m, the
// plant's convention) and the hip, measured from the belt's ends (the
// belt is the level segment from x = −1 to x = 1). The firmware's belt
// term is off (belt_gain 0): with it, the reference firmware holds its
// place on this belt too, and the test is of the rig's alarms.
func TestBeltEndAlarms(t *testing.T) {
	s := variant(t, "treadmill-short", "        speed_mps: 0.78\n", "        speed_mps: 0.5\n",
		"  mode: walk\n", "  mode: walk\n  settings:\n    belt_gain: 0\n")
	res, run, ticks := runFolder(t, s)
	if res.Summary.Outcome != record.Tripped || !strings.HasPrefix(res.Summary.Reason, hil.AlarmBeltEndPassed) {
		t.Fatalf("outcome %s (%s), want tripped by %s", res.Summary.Outcome, res.Summary.Reason, hil.AlarmBeltEndPassed)
	}
	first := func(kind string) int64 {
		for _, e := range run.Events {
			if e.Kind == kind {
				return e.Tick
			}
		}
		t.Fatalf("no %s event", kind)
		return -1
	}
	near, passed := first(hil.AlarmBeltEndNear), first(hil.AlarmBeltEndPassed)
	// The least distance of hip and leg ends to either belt end, per tick.
	const rear, front, L, margin = -1.0, 1.0, 0.9, 0.25
	least := func(tk *record.Tick) float64 {
		d := math.Min(tk.Q[0]-rear, front-tk.Q[0])
		for i := 0; i < 2; i++ {
			x := tk.Q[0] + L*math.Sin(tk.Q[2+i])
			d = math.Min(d, math.Min(x-rear, front-x))
		}
		return d
	}
	wantNear, wantPassed := int64(-1), int64(-1)
	for k := range ticks {
		d := least(&ticks[k])
		if wantNear < 0 && d < margin {
			wantNear = ticks[k].Index
		}
		if wantPassed < 0 && d < 0 {
			wantPassed = ticks[k].Index
		}
	}
	t.Logf("belt_end_near at tick %d (independent: %d), belt_end_passed at tick %d (independent: %d)", near, wantNear, passed, wantPassed)
	if near != wantNear || passed != wantPassed {
		t.Errorf("alarm ticks near %d passed %d, telemetry says %d and %d", near, passed, wantNear, wantPassed)
	}
	if !(near < passed) {
		t.Errorf("belt_end_near (tick %d) must come before belt_end_passed (tick %d)", near, passed)
	}
}

// TestTreadmillReplay: a treadmill run replays bit for bit from its
// folder: the belt's motion over each tick is rebuilt from the recorded
// belt speeds exactly as the loop built it, and the harness rope's pull is
// in the recorded hip force. treadmill-pulses has a speed-up and a
// slow-down pulse; the caught fall of TestHarnessCatchesAFall has the rope.
func TestTreadmillReplay(t *testing.T) {
	pulses, err := scenarios.LoadBuiltin("treadmill-pulses")
	if err != nil {
		t.Fatal(err)
	}
	fall := variant(t, "treadmill-steady",
		"  torso:\n    mass_kg: 15           # demo value\n    com_m: 0.3            # demo value\n    inertia_kgm2: 0.6     # demo value\n", "",
		"  torso_angle_rad: -0.1   # leaning forward\n", "",
		"  link: builtin\n  mode: walk\n", "  link: none\n",
		"physics:\n", "physics:\n  on_slip: continue\n  on_lift_off: continue\n",
		"pass:\n", "alarms:\n  friction_limit: warn\n  lift_off: warn\npass:\n")
	for _, s := range []*scenarios.Scenario{pulses, fall} {
		res, run, _ := runFolder(t, s)
		r, err := Replay(run.Dir)
		if err != nil {
			t.Fatal(err)
		}
		t.Logf("%s: %s", s.Name, r)
		if !r.Match || int64(r.Ticks) != res.Summary.Ticks {
			t.Errorf("%s: replay %s (run had %d ticks)", s.Name, r, res.Summary.Ticks)
		}
	}
}

// TestTreadmillReport: the report of a treadmill run draws the belt speed
// with each perturbation pulse marked at the start the loop logged (a
// step-timed pulse of treadmill-pulses and a timed one added here), and a
// run on fixed ground has no belt plot.
func TestTreadmillReport(t *testing.T) {
	s := variant(t, "treadmill-pulses", "        pulses:\n", "        pulses:\n          - {at_s: 3, delta_mps: 0.2, rise_s: 0.1}\n")
	_, run, _ := runFolder(t, s)
	if err := report.WriteHTML(run.Dir); err != nil {
		t.Fatal(err)
	}
	page, err := os.ReadFile(filepath.Join(run.Dir, report.HTMLFile))
	if err != nil {
		t.Fatal(err)
	}
	var starts []string
	for _, e := range run.Events {
		if e.Kind == "belt_pulse" {
			starts = append(starts, report.FormatNumber(e.Values["start_s"])+" s")
		}
	}
	if len(starts) != 3 {
		t.Fatalf("belt_pulse events at %v, want 3 (one timed, two at steps)", starts)
	}
	text := string(page)
	if !strings.Contains(text, "plot-belt-speed") {
		t.Fatal("no belt speed plot in the report")
	}
	for _, st := range starts {
		if !strings.Contains(text, st) {
			t.Errorf("the report does not mark the pulse starting at %s", st)
		}
	}
	level, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	level.Run.MaxSteps = 3
	_, lrun, _ := runFolder(t, level)
	if err := report.WriteHTML(lrun.Dir); err != nil {
		t.Fatal(err)
	}
	if lp, err := os.ReadFile(filepath.Join(lrun.Dir, report.HTMLFile)); err != nil || strings.Contains(string(lp), "plot-belt-speed") {
		t.Errorf("fixed ground: report read error %v, or a belt plot where there is no belt", err)
	}
}

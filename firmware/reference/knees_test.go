package reference

import (
	"math"
	"testing"

	"gaitrig/bridges/protocol"
	"gaitrig/plant"
)

// TestKneeTorques checks the knee part of the law against its written
// steps (knees.go) for both phases of the swing, the stance hold, and a
// reading without actuated knees.
func TestKneeTorques(t *testing.T) {
	g := DefaultGains()
	k := g.Knee
	// Torso walker, left stance (only the left switch), so the right leg
	// swings; speed error e from the stance rate as placeSwing computes it.
	base := Reading{Joints: 4, Knees: 2, Pitch: -0.1, PitchRate: 0, Contacts: 1}
	base.Rate = [2]float64{-0.9, 0.5} // hip rates: absolute leg rate = hip rate + torso rate
	e := -g.LegLength*base.Rate[0] - g.TargetSpeed
	phi := clamp(g.StepAngle+g.StepSpeedGain*e, g.StepMin, g.StepMax)
	tests := []struct {
		name    string
		thSw    float64 // absolute swing thigh angle
		knee    float64 // swing knee angle
		rate    float64 // swing knee rate
		target  float64
		comment string
	}{
		{"early swing flexes", phi - k.ExtendLead - 0.2, 0, 0, k.Flex, "thigh well behind the step angle"},
		{"late swing extends", phi - k.ExtendLead + 0.01, -0.6, -1, 0, "thigh past the extension point"},
		{"at the step angle extends", phi, -0.1, 2, 0, ""},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			r := base
			r.Angle = [2]float64{0.2 - r.Pitch, tc.thSw - r.Pitch} // hip angle = θ_leg − θ_torso
			r.KneeAngle = [2]float64{0, tc.knee}
			r.KneeRate = [2]float64{0, tc.rate}
			tau := make([]float64, 4)
			if st := Law(&g, &r, tau); st != 0 {
				t.Fatalf("stance %d, want 0 (left switch closed)", st)
			}
			want := clamp(k.SwingKp*(tc.target-tc.knee)-k.SwingKd*tc.rate, -g.TorqueLimit, g.TorqueLimit)
			if tau[3] != want {
				t.Errorf("swing knee torque %g, want %g (target %g)", tau[3], want, tc.target)
			}
			if tau[2] != k.Hold {
				t.Errorf("stance knee torque %g, want the hold %g", tau[2], k.Hold)
			}
			// The hips are the law without knees.
			r2 := r
			r2.Joints, r2.Knees = 2, 0
			hips := make([]float64, 2)
			Law(&g, &r2, hips)
			if hips[0] != tau[0] || hips[1] != tau[1] {
				t.Errorf("hip torques %v with knees, %v without", tau[:2], hips)
			}
		})
	}
	// A torque limit clips the knee torque too.
	r := base
	r.Angle = [2]float64{0.3, -0.6}
	g2 := g
	g2.TorqueLimit = 1
	tau := make([]float64, 4)
	Law(&g2, &r, tau)
	if tau[3] != -1 && tau[3] != 1 {
		t.Errorf("swing knee torque %g not clipped to ±1", tau[3])
	}
	// Compass walker with knees: joints hip, knee_left, knee_right.
	c := Reading{Joints: 3, Knees: 2, Pitch: 0.2, PitchRate: -1, Contacts: 1}
	c.Angle[0] = -0.5 // right leg at −0.3: far behind, so its knee flexes
	tau = make([]float64, 3)
	Law(&g, &c, tau)
	if want := k.SwingKp * k.Flex; tau[2] != want || tau[1] != k.Hold {
		t.Errorf("compass with knees: knee torques %v, want [hold %g, flex %g]", tau[1:], k.Hold, want)
	}
}

func TestKneeJoints(t *testing.T) {
	for _, tc := range []struct {
		names []string
		want  int
	}{
		{[]string{"hip"}, 0},
		{[]string{"hip_left", "hip_right"}, 0},
		{[]string{"hip_left", "hip_right", "knee_left", "knee_right"}, 2},
		{[]string{"hip", "knee_left", "knee_right"}, 2},
		{[]string{"hip_left", "hip_right", "knee_right"}, 0}, // one actuated knee: left passive by the law
		{[]string{"hip_left", "hip_right", "knee_right", "knee_left"}, 0},
	} {
		if got := kneeJoints(tc.names); got != tc.want {
			t.Errorf("kneeJoints(%v) = %d, want %d", tc.names, got, tc.want)
		}
	}
}

// walkKneed runs the closed loop with noise-free readings and scuffs not
// ignored, and returns the heel strikes before the first scuff or fall.
func walkKneed(t *testing.T, g Gains, steps int) (n int, stop string) {
	t.Helper()
	m, err := plant.New(KneedDemoParams(), plant.Options{})
	if err != nil {
		t.Fatal(err)
	}
	s, err := m.Stand(0, 0, DemoStart.LegAngles, DemoStart.TorsoAngle, DemoStart.Rates[:]...)
	if err != nil {
		t.Fatal(err)
	}
	policy := PlantPolicy(m, g)
	var in plant.Input
	var r plant.TickResult
	for s.T < 60 && n < steps {
		in = plant.Input{}
		policy(m, &s, &in)
		m.Step(&s, &in, 1e-3, &r)
		for _, e := range r.Events[:r.NumEvents] {
			switch e.Kind {
			case plant.HeelStrike:
				n++
			case plant.Scuff, plant.Fall, plant.KneeBuckle:
				return n, e.Kind.String()
			}
		}
		if r.Stopped {
			return n, "stopped"
		}
	}
	return n, ""
}

// TestKneedWalkerClearsItsFoot walks the kneed demo walker with the default
// gains and scuffs counted as failures: the swing knee's flexion is what
// lifts the foot over level ground. With the swing knee driven straight
// instead (Knee.Flex 0: the law pushes it into its stop all swing) the
// same walker scuffs, so the test can fail. With zero knee torque the
// passive knee of this walker happens to flex enough as well (as a passive
// kneed walker's does); that run is logged, not asserted.
func TestKneedWalkerClearsItsFoot(t *testing.T) {
	n, stop := walkKneed(t, DefaultGains(), 40)
	if n < 40 {
		t.Fatalf("the kneed walker made %d steps, then %s; want 40", n, stop)
	}
	g := DefaultGains()
	g.Knee.Flex = 0
	if n, stop := walkKneed(t, g, 40); stop != plant.Scuff.String() {
		t.Errorf("with the swing knee held straight the walker made %d steps, then %q; want a scuff", n, stop)
	}
	g.Knee = KneeGains{}
	n, stop = walkKneed(t, g, 40)
	t.Logf("zero knee torque: %d steps, stop %q", n, stop)
}

// TestServeKnees configures the firmware with four joints named as a
// kneed torso walker's and checks it answers knee torques by the law.
func TestServeKnees(t *testing.T) {
	f, err := New(Options{Actuators: 4})
	if err != nil {
		t.Fatal(err)
	}
	cfg := protocol.Message{Version: protocol.Version, Type: protocol.TypeConfig}
	cfg.Config = protocol.Config{TickHz: 1000, Lockstep: true, Joints: 4, WatchdogUS: 50000}
	copy(cfg.Config.JointNames[:], []string{"hip_left", "hip_right", "knee_left", "knee_right"})
	if _, end, err := f.Handle(&cfg); end || err != nil {
		t.Fatalf("config: end %v, err %v", end, err)
	}
	st := protocol.Message{Version: protocol.Version, Type: protocol.TypeState, Seq: 7}
	st.State = protocol.State{Joints: 4, Contacts: 1, IMUPitch: -0.1}
	st.State.Angle = [protocol.MaxJoints]float32{0.35, -0.4, 0, -0.2}
	out, _, err := f.Handle(&st)
	if err != nil || out == nil || out.Type != protocol.TypeCommand {
		t.Fatalf("answer %+v, err %v", out, err)
	}
	r := Reading{Joints: 4, Knees: 2, Pitch: float64(float32(-0.1)), Contacts: 1}
	r.Angle = [2]float64{float64(float32(0.35)), float64(float32(-0.4))}
	r.KneeAngle = [2]float64{0, float64(float32(-0.2))}
	g := DefaultGains()
	tau := make([]float64, 4)
	Law(&g, &r, tau)
	for i := range tau {
		if out.Command.Torque[i] != float32(tau[i]) {
			t.Errorf("torque %d = %g, want %g", i, out.Command.Torque[i], tau[i])
		}
	}
	if tau[3] == 0 || tau[2] != g.Knee.Hold {
		t.Errorf("knee torques %v: want a swing-knee torque and the stance hold", tau[2:])
	}
}

func TestKneeSettings(t *testing.T) {
	g, err := GainsFromSettings(map[string]float64{"knee_flex_rad": -0.5, "knee_extend_lead_rad": 0.2, "knee_swing_kp": 10, "knee_swing_kd": 1, "knee_hold_nm": 2, "knee_stop_rad": -0.05})
	if err != nil {
		t.Fatal(err)
	}
	if want := (KneeGains{Flex: -0.5, ExtendLead: 0.2, SwingKp: 10, SwingKd: 1, Hold: 2, Stop: -0.05}); g.Knee != want {
		t.Errorf("knee gains %+v, want %+v", g.Knee, want)
	}
}

// Late in swing the swing knee is driven to the walker's stop (Knee.Stop,
// the scenario's knee_stop_rad), not to a straight knee: at the stop and
// at rest it gets no torque, short of it a torque toward it.
func TestSwingKneeAimsAtTheStop(t *testing.T) {
	g := DefaultGains()
	// Stance left, the swing (right) thigh well forward: late swing.
	r := Reading{Joints: 4, Knees: 2, Pitch: -0.1, Contacts: 1}
	r.Angle = [2]float64{0.1, 0.7}
	for _, stop := range []float64{0, -0.08, 0.05} {
		g.Knee.Stop = stop
		tau := make([]float64, 4)
		r.KneeAngle = [2]float64{0, stop}
		Law(&g, &r, tau)
		if tau[3] != 0 {
			t.Errorf("stop %g: swing knee at its stop gets %g N·m, want 0", stop, tau[3])
		}
		r.KneeAngle[1] = stop - 0.1
		Law(&g, &r, tau)
		if want := g.Knee.SwingKp * 0.1; math.Abs(tau[3]-want) > 1e-9 {
			t.Errorf("stop %g: swing knee 0.1 rad short of it gets %g N·m, want %g", stop, tau[3], want)
		}
	}
}

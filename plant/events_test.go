package plant

import (
	"math"
	"testing"
)

// TestFlightAndTouchdown: with lift-off allowed, an inverted pendulum that
// is too fast for its leg (Froude number 1.2 at mid-stance) leaves the
// ground, flies, and lands again in a plastic impact (on its short swing
// leg ahead: a heel strike; or on the same foot: a touchdown).
func TestFlightAndTouchdown(t *testing.T) {
	m := invertedPendulum(t, Options{ContinueOnLiftOff: true, FallHipHeight: -1})
	s, err := m.Stand(0, 0, [2]float64{0, 0.3}, 0, -math.Sqrt(1.2*9.81), 0)
	if err != nil {
		t.Fatal(err)
	}
	var r TickResult
	var kinds []EventKind
	for i := 0; i < 3000 && len(kinds) < 2; i++ {
		m.Step(&s, nil, 1e-3, &r)
		for k := 0; k < r.NumEvents; k++ {
			kinds = append(kinds, r.Events[k].Kind)
			if kk := r.Events[k].Kind; (kk == Touchdown || kk == HeelStrike) && !(r.Events[k].EnergyLost > 0) {
				t.Errorf("touchdown lost %g J, want > 0 (plastic impact)", r.Events[k].EnergyLost)
			}
		}
		if r.Stopped {
			t.Fatalf("stopped: %v", r.Events[:r.NumEvents])
		}
	}
	if len(kinds) < 2 || kinds[0] != LiftOff || (kinds[1] != Touchdown && kinds[1] != HeelStrike) {
		t.Fatalf("events %v, want lift_off then a landing impact", kinds)
	}
}

// TestFallStops: the demo walker without any torque falls; the plant
// reports the fall and stops.
func TestFallStops(t *testing.T) {
	m, err := New(DemoParams(), Options{ContinueOnSlip: true, ContinueOnLiftOff: true, IgnoreScuff: true})
	if err != nil {
		t.Fatal(err)
	}
	s, err := m.Stand(0, 0, [2]float64{0.05, -0.05}, 0.2)
	if err != nil {
		t.Fatal(err)
	}
	var r TickResult
	for i := 0; i < 5000; i++ {
		m.Step(&s, nil, 1e-3, &r)
		if r.Stopped {
			break
		}
	}
	if !r.Stopped || r.Events[r.NumEvents-1].Kind != Fall {
		t.Fatalf("stopped %v, events %v; want a fall", r.Stopped, r.Events[:r.NumEvents])
	}
	e := r.Events[r.NumEvents-1]
	if e.Foot == -1 {
		if math.Abs(math.Abs(e.Value)-m.Options().FallTorsoAngle) > 1e-9 {
			t.Errorf("torso fall at %g rad, limit %g", e.Value, m.Options().FallTorsoAngle)
		}
	} else if math.Abs(e.Value-m.Options().FallHipHeight) > 1e-9 {
		t.Errorf("hip fall at height %g, limit %g", e.Value, m.Options().FallHipHeight)
	}
}

// TestNonFiniteIsReported: an absurd but finite torque overflows the
// accelerations; the plant reports a non-finite state, stops, and keeps
// the last finite state instead of panicking or returning NaN.
func TestNonFiniteIsReported(t *testing.T) {
	m, err := New(DemoParams(), Options{})
	if err != nil {
		t.Fatal(err)
	}
	s, err := m.Stand(0, 0, [2]float64{0.1, -0.1}, 0)
	if err != nil {
		t.Fatal(err)
	}
	before := s
	in := Input{Torque: [MaxActuators]float64{1e308, -1e308}}
	var r TickResult
	m.Step(&s, &in, 1e-3, &r)
	if !r.Stopped || r.NumEvents == 0 || r.Events[r.NumEvents-1].Kind != NonFinite {
		t.Fatalf("stopped %v events %v", r.Stopped, r.Events[:r.NumEvents])
	}
	if !finitePhase(&phase{q: s.Q, v: s.V}, m.n) || s.T != before.T {
		t.Errorf("state after the failure: t %g q %v v %v", s.T, s.Q, s.V)
	}
}

// TestGaitWithPolicy: the gait finder and the variational map Jacobian
// with a controller in the loop. A policy that returns no torque gives the
// passive gait; a hip damper τ = −c (θ̇_right − θ̇_left) (c = 0.05 N·m·s), a pure function of
// the state, gives a different gait whose variational Jacobian still agrees
// with central differences of the closed-loop map.
func TestGaitWithPolicy(t *testing.T) {
	var fx scipyFixture
	readFixture(t, "passive_step_scipy.json", &fx)
	m := fixtureModel(t, &fx)
	fp := fx.FixedPoint
	guess := fixtureState(m, 0, fp.Q, fp.V, fp.Stance)
	zero := func(m *Model, s *State, in *Input) {}
	g0, err := FindGait(m, zero, guess, GaitOptions{Tol: 1e-12})
	if err != nil || !g0.Found {
		t.Fatalf("zero policy: %v (found %v)", err, g0.Found)
	}
	closeVec(t, "zero-policy gait", g0.Reduced, m.Reduced(&guess), 1e-8)
	damper := func(m *Model, s *State, in *Input) { in.Torque[0] = -0.05 * (s.V[3] - s.V[2]) }
	g1, err := FindGait(m, damper, guess, GaitOptions{Tol: 1e-12})
	if err != nil || !g1.Found {
		t.Fatalf("damper policy: %v (found %v)", err, g1.Found)
	}
	if d := math.Abs(g1.Reduced[0] - g0.Reduced[0]); d < 1e-4 {
		t.Errorf("the hip damper did not change the gait (stance angle moved %g)", d)
	}
	jv, err := m.MapJacobian(g1.State, damper, GaitOptions{Tol: 1e-13})
	if err != nil {
		t.Fatal(err)
	}
	jf, err := m.MapJacobianFD(g1.State, damper, GaitOptions{Tol: 1e-13}, 1e-5)
	if err != nil {
		t.Fatal(err)
	}
	r, c := jv.Dims()
	worst, scale := 0.0, 0.0
	for i := 0; i < r; i++ {
		for j := 0; j < c; j++ {
			worst = math.Max(worst, math.Abs(jv.At(i, j)-jf.At(i, j)))
			scale = math.Max(scale, math.Abs(jv.At(i, j)))
		}
	}
	if worst > 1e-6*scale {
		t.Errorf("closed-loop map Jacobian: variational and central differences differ by %.3g (scale %.3g)", worst, scale)
	}
	t.Logf("damped gait: eigenvalues %v, Jacobian agreement %.2g", g1.Eigenvalues, worst/scale)
}

// TestSlipAndStickAgain: a half-disk resting on its curved face is pushed
// sideways at its centre (40 N for 50 ms) harder than static friction can
// hold while it rolls (it needs about 4.6 N; μ_s m g = 2.9 N): the friction
// alarm fires and, with ContinueOnSlip, the disk slides; once the push
// ends, kinetic friction stops the slip and the foot sticks again
// (Coulomb's law, common practice).
func TestSlipAndStickAgain(t *testing.T) {
	m, err := New(halfDiskParams(0.15, 0.1), Options{ContinueOnSlip: true})
	if err != nil {
		t.Fatal(err)
	}
	s, err := m.Stand(0, 0, [2]float64{}, 0)
	if err != nil {
		t.Fatal(err)
	}
	var r TickResult
	var kinds []EventKind
	for i := 0; i < 2000; i++ {
		in := Input{}
		if i < 50 {
			in.HipForce[0] = 40
		}
		m.Step(&s, &in, 1e-3, &r)
		for k := 0; k < r.NumEvents; k++ {
			kinds = append(kinds, r.Events[k].Kind)
		}
		if r.Stopped {
			t.Fatalf("stopped: %v", r.Events[:r.NumEvents])
		}
		if i == 40 && r.Contacts[0].Mode != Sliding {
			t.Fatalf("during the push the foot is %v, want sliding (events %v)", r.Contacts[0].Mode, kinds)
		}
	}
	if len(kinds) < 2 || kinds[0] != FrictionLimit || kinds[1] != Stick {
		t.Fatalf("events %v, want friction_limit then stick", kinds)
	}
	if c := r.Contacts[0]; c.Mode != Rolling || math.Abs(c.SlipVel) > 1e-12 {
		t.Errorf("at the end: mode %v slip %g m/s", c.Mode, c.SlipVel)
	}
}

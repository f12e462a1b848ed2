package plant

import (
	"math"
	"testing"
)

// TestArcFootImpactSpeedRatio: a point hip mass on massless legs with arc
// feet, legs at ±θ, both feet on level ground. Angular momentum about the
// new contact point is conserved through the plastic impact, so the hip
// speed drops by cos 2φ with φ = atan((L−R) sin θ / (R + (L−R) cos θ)), the
// angle of the line from contact point to hip; R = 0 gives cos 2θ and R = L
// loses nothing (the "synthetic wheel" of McGeer 1990, Int. J. Robotics
// Research 9(2):62–82). Legs: mass 1e-9 of the hip's at the arc centre.
func TestArcFootImpactSpeedRatio(t *testing.T) {
	const L = 1.0
	for _, c := range []struct{ R, th float64 }{
		{0, 0.2}, {0, 0.35}, {0.3, 0.2}, {0.3, 0.4}, {0.6, 0.3}, {0.9, 0.25}, {1, 0.3},
	} {
		leg := Leg{Length: L, Mass: 1e-9, COMDist: L - c.R, FootRadius: c.R}
		if c.R == L {
			leg.Inertia = 1e-9 // the arc centre is the hip: give the leg angle some inertia
		}
		p := Params{HipMass: 1, Legs: [2]Leg{leg, leg}, Gravity: 9.81,
			Terrain: Terrain{Segments: []Segment{{Length: 10, MuStatic: 10, MuKinetic: 10}}}}
		m, err := New(p, Options{})
		if err != nil {
			t.Fatal(err)
		}
		// Stance (left) leg trailing at −θ, swing leg leading at +θ, both feet
		// on the ground; the stance foot rolls forward at −1 rad/s.
		s, err := m.Stand(0, 0, [2]float64{-c.th, c.th}, 0, -1, 0)
		if err != nil {
			t.Fatal(err)
		}
		v0 := math.Hypot(s.V[0], s.V[1])
		var ev eval
		m.rhs(&s, &s.Q, &s.V, nil, &ev)
		if math.Abs(ev.geom[1].gap) > 1e-12 {
			t.Fatalf("R = %g θ = %g: swing foot gap %g, want 0", c.R, c.th, ev.geom[1].gap)
		}
		var r TickResult
		m.impact(&s, 1, true, &ev, &r)
		ratio := math.Hypot(s.V[0], s.V[1]) / v0
		phi := math.Atan((L - c.R) * math.Sin(c.th) / (c.R + (L-c.R)*math.Cos(c.th)))
		want := math.Cos(2 * phi)
		if math.Abs(ratio-want) > 1e-7 {
			t.Errorf("R = %g θ = %g: hip speed ratio %.10f, want cos 2φ = %.10f", c.R, c.th, ratio, want)
		}
		if s.Mode[0] != Free || s.Mode[1] != Rolling || s.Stance != 1 {
			t.Errorf("R = %g θ = %g: after impact modes %v stance %d, want old stance released", c.R, c.th, s.Mode, s.Stance)
		}
		if c.R == L {
			e := r.Events[r.NumEvents-1]
			if e.Kind != HeelStrike || math.Abs(e.EnergyLost) > 1e-8*0.5*v0*v0 {
				t.Errorf("R = L: event %v energy lost %g, want a lossless heel strike (up to the 1e-9 leg inertia)", e.Kind, e.EnergyLost)
			}
		}
	}
}

// TestHalfDiskRocking: a uniform half-disk of radius R rocking on its
// curved face, as a one-link configuration (Params.OneLeg): the arc centre
// is the "hip" (FootRadius = Length = R), the centre of mass 4R/(3π) below
// it, inertia about the centre of mass ½mR² − m(4R/3π)². Small-amplitude
// rocking has ω² = 8g/((9π − 16)R) (classical rigid-body dynamics textbook
// result, from memory). The period is measured from zero crossings over
// about 5 cycles with the real-time Step at 1 kHz.
func TestHalfDiskRocking(t *testing.T) {
	const R, mass, g = 0.5, 2.0, 9.81
	d := 4 * R / (3 * math.Pi)
	p := Params{HipMass: 0, OneLeg: true, Gravity: g,
		Legs:    [2]Leg{{Length: R, Mass: mass, COMDist: d, Inertia: 0.5*mass*R*R - mass*d*d, FootRadius: R}},
		Terrain: Terrain{Start: [2]float64{-5, 0}, Segments: []Segment{{Length: 10, MuStatic: 1, MuKinetic: 1}}}}
	m, err := New(p, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if m.NumDOF() != 3 || m.NumActuators() != 0 || len(m.JointNames()) != 0 {
		t.Fatalf("one-leg model: %d DOF, %d actuators", m.NumDOF(), m.NumActuators())
	}
	s, err := m.Stand(0, 0, [2]float64{1e-3, 0}, 0)
	if err != nil {
		t.Fatal(err)
	}
	var r TickResult
	var crossings []float64
	prev := s.Q[2]
	const dt = 1e-3
	for i := 0; i < 10000; i++ {
		tPrev := s.T
		m.Step(&s, nil, dt, &r)
		if r.Stopped {
			t.Fatalf("stopped: %v", r.Events[0].Kind)
		}
		if (prev > 0) != (s.Q[2] > 0) {
			crossings = append(crossings, tPrev+dt*prev/(prev-s.Q[2]))
		}
		prev = s.Q[2]
	}
	if len(crossings) < 3 {
		t.Fatalf("only %d zero crossings", len(crossings))
	}
	n := len(crossings) - 1
	period := 2 * (crossings[n] - crossings[0]) / float64(n)
	omega2 := math.Pow(2*math.Pi/period, 2)
	want := 8 * g / ((9*math.Pi - 16) * R)
	if rel := math.Abs(omega2-want) / want; rel > 1e-4 {
		t.Errorf("ω² = %.8f, want %.8f (relative error %.2g > 1e-4)", omega2, want, rel)
	} else {
		t.Logf("ω² = %.8f, textbook %.8f, relative error %.2g over %d half periods", omega2, want, rel, n)
	}
}

// invertedPendulum is a point mass on a massless rigid leg with a point
// foot (leg mass 1e-9 of the hip's at the foot), L = 1, on level ground.
// The swing leg is short (0.5) so it never reaches the ground.
func invertedPendulum(t *testing.T, o Options) *Model {
	t.Helper()
	p := Params{HipMass: 1, Gravity: 9.81,
		Legs:    [2]Leg{{Length: 1, Mass: 1e-9, COMDist: 1}, {Length: 0.5, Mass: 1e-9, COMDist: 0.5}},
		Terrain: Terrain{Start: [2]float64{-5, 0}, Segments: []Segment{{Length: 10, MuStatic: 1e9, MuKinetic: 1e9}}}} // friction never limits here
	m, err := New(p, o)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// TestInvertedPendulumGroundForce: the ground force on a massless leg acts
// along the leg, so F_t/N = −tan θ (our sign: θ > 0 has the foot ahead of
// the hip and the force pushes the walker backward); its size is
// M (g cos θ − v²/L), so starting at mid-stance with speed v the normal
// force is M (g − v²/L) and, with v² = v_mid² + 2gL(1 − cos θ), it reaches
// zero at cos θ = (2 + Fr)/3, Fr = v_mid²/(gL); at Fr ≥ 1 it is already
// negative at mid-stance (classical inverted-pendulum walking result;
// Alexander 1989, Physiol. Rev. 69:1199–1227, from memory). The lift-off
// alarm must fire exactly there.
func TestInvertedPendulumGroundForce(t *testing.T) {
	const g, L, M = 9.81, 1.0, 1.0
	for _, fr := range []float64{0.5, 0.98, 1.02} {
		m := invertedPendulum(t, Options{})
		v := math.Sqrt(fr * g * L)
		s, err := m.Stand(0, 0, [2]float64{0, 0.3}, 0, -v/L, 0)
		if err != nil {
			t.Fatal(err)
		}
		c := m.Contacts(&s, nil)
		if want := M * (g - v*v/L); math.Abs(c[0].Normal-want) > 1e-7*g {
			t.Errorf("Fr = %g: mid-stance N = %.10f, want M(g − v²/L) = %.10f", fr, c[0].Normal, want)
		}
		var r TickResult
		lifted := false
		for i := 0; i < 2000 && !lifted; i++ {
			m.Step(&s, nil, 1e-3, &r)
			for k := 0; k < r.NumEvents; k++ {
				e := r.Events[k]
				if e.Kind != LiftOff {
					t.Fatalf("Fr = %g: unexpected event %v", fr, e.Kind)
				}
				lifted = true
				th := s.Q[2]
				if fr < 1 {
					want := -math.Acos((2 + fr) / 3)
					if math.Abs(th-want) > 1e-7 {
						t.Errorf("Fr = %g: lift-off at θ = %.9f, want %.9f", fr, th, want)
					}
				} else if e.T != 0 || e.Value >= 0 {
					t.Errorf("Fr = %g: lift-off at t = %g with N = %g, want at once with N < 0", fr, e.T, e.Value)
				}
				if !r.Stopped {
					t.Errorf("Fr = %g: lift-off did not stop the tick (ContinueOnLiftOff is false)", fr)
				}
			}
			if lifted {
				break
			}
			ct := r.Contacts[0]
			// Compared as forces (F_t + N tan θ = 0 within 1e-8 M g) since
			// the ratio itself is ill-conditioned as N → 0 near lift-off.
			if res := ct.Tangential + ct.Normal*math.Tan(s.Q[2]); math.Abs(res) > 1e-8*M*g {
				t.Fatalf("Fr = %g at θ = %g: F_t/N = %.10f, want −tan θ = %.10f", fr, s.Q[2], ct.Tangential/ct.Normal, -math.Tan(s.Q[2]))
			}
		}
		if !lifted {
			t.Errorf("Fr = %g: no lift-off alarm", fr)
		}
	}
}

// TestLiftOffContinues: with ContinueOnLiftOff the foot leaves the ground
// and the walker flies (ballistic hip: ÿ = −g with the leg massless).
func TestLiftOffContinues(t *testing.T) {
	m := invertedPendulum(t, Options{ContinueOnLiftOff: true, FallHipHeight: -1})
	s, err := m.Stand(0, 0, [2]float64{0, 0.3}, 0, -math.Sqrt(1.2*9.81), 0)
	if err != nil {
		t.Fatal(err)
	}
	var r TickResult
	m.Step(&s, nil, 1e-3, &r)
	if r.Stopped || r.NumEvents != 1 || r.Events[0].Kind != LiftOff || s.Mode[0] != Free {
		t.Fatalf("events %v stopped %v mode %v", r.Events[:r.NumEvents], r.Stopped, s.Mode)
	}
	acc, ok := m.Accel(&s, nil)
	if !ok || math.Abs(acc[1]+9.81) > 1e-6 || math.Abs(acc[0]) > 1e-6 {
		t.Errorf("flight acceleration %v, want (0, −g)", acc[:2])
	}
}

// TestPassiveStanceEnergy: passive rocking on one rolling arc foot with a
// swinging leg that never reaches the ground (no impact) conserves the
// total mechanical energy (conservation law). Real-time step: 1 ms ticks of
// the default RK4 sub-steps, 10 s. The drift is measured relative to the
// largest kinetic energy of the run (the energy that is exchanged), which
// is stricter than relative to the total energy.
func TestPassiveStanceEnergy(t *testing.T) {
	p := Params{HipMass: 10, Gravity: 9.81,
		Legs: [2]Leg{
			{Length: 1, Mass: 5, COMDist: 0.5, Inertia: 0.4, FootRadius: 1},
			{Length: 0.6, Mass: 2, COMDist: 0.3, Inertia: 0.05, FootRadius: 0.1},
		},
		Terrain: Terrain{Start: [2]float64{-10, 0}, Segments: []Segment{{Length: 20, MuStatic: 5, MuKinetic: 5}}}}
	m, err := New(p, Options{})
	if err != nil {
		t.Fatal(err)
	}
	s, err := m.Stand(0, 0, [2]float64{0.3, -0.4}, 0, 0.5, -1)
	if err != nil {
		t.Fatal(err)
	}
	k0, p0 := m.Energy(&s)
	e0 := k0 + p0
	var r TickResult
	maxK, drift := k0, 0.0
	// Rolling without slipping: the arc centre stays R above the ground
	// and moves by −R Δθ along it.
	c0, _, _ := m.footCentre(&s.Q, 0)
	th0 := s.Q[2]
	R := p.Legs[0].FootRadius
	for i := 0; i < 10000; i++ {
		m.Step(&s, nil, 1e-3, &r)
		if r.NumEvents > 0 {
			t.Fatalf("t = %g: unexpected event %v", s.T, r.Events[0].Kind)
		}
		c, _, _ := m.footCentre(&s.Q, 0)
		if dh, dx := c[1]-R, (c[0]-c0[0])+R*(s.Q[2]-th0); math.Abs(dh) > 1e-12 || math.Abs(dx) > 1e-12 {
			t.Fatalf("t = %g: arc centre %.3g m off its height, %.3g m off the rolling distance", s.T, dh, dx)
		}
		k, pe := m.Energy(&s)
		maxK = math.Max(maxK, k)
		drift = math.Max(drift, math.Abs(k+pe-e0))
	}
	rel := drift / maxK
	t.Logf("10 s passive stance: max |ΔE| = %.3g J, max kinetic %.3g J, relative drift %.3g (relative to total energy %.3g)", drift, maxK, rel, drift/math.Abs(e0))
	if rel > 1e-9 {
		t.Errorf("relative energy drift %.3g > 1e-9", rel)
	}
}

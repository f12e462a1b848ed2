package plant

import (
	"errors"
	"math"
	"testing"
)

// cross is the z component of a × b.
func cross(a, b [2]float64) float64 { return a[0]*b[1] - a[1]*b[0] }

// angularMomentum returns, from the parameters alone (each body's position
// p = joint + r·a(θ) and velocity v = v_joint + r·a⊥(θ)·θ̇, written out here
// and not taken from the model), the angular momentum Σ m (p − P) × v + I θ̇
// about point P of the whole walker (leg −1) or of leg i's thigh and shank
// (a compass walker without a torso, both legs kneed).
func angularMomentum(p Params, s *State, P [2]float64, leg int) float64 {
	hip := [2]float64{s.Q[0], s.Q[1]}
	vh := [2]float64{s.V[0], s.V[1]}
	body := func(m, I float64, joint, vjoint [2]float64, r, th, w float64) float64 {
		sn, cs := math.Sincos(th)
		pos := [2]float64{joint[0] + r*sn, joint[1] - r*cs}
		vel := [2]float64{vjoint[0] + r*cs*w, vjoint[1] + r*sn*w}
		return m*cross([2]float64{pos[0] - P[0], pos[1] - P[1]}, vel) + I*w
	}
	H := 0.0
	if leg < 0 {
		H += body(p.HipMass, 0, hip, vh, 0, 0, 0)
	}
	for i := 0; i < 2; i++ {
		if leg >= 0 && i != leg {
			continue
		}
		l := p.Legs[i]
		th, w := s.Q[2+i], s.V[2+i]
		H += body(l.Mass, l.Inertia, hip, vh, l.COMDist, th, w)
		sn, cs := math.Sincos(th)
		knee := [2]float64{hip[0] + l.Length*sn, hip[1] - l.Length*cs}
		vk := [2]float64{vh[0] + l.Length*cs*w, vh[1] + l.Length*sn*w}
		sh := l.Shank
		H += body(sh.Mass, sh.Inertia, knee, vk, sh.COMDist, s.Q[4+i], s.V[4+i])
	}
	return H
}

// swingKneeState stands the kneed walker of kneedPair on its left foot
// with the right knee unlocked, flexed by bend (rad) and closing at rate
// (rad/s).
func swingKneeState(t *testing.T, m *Model, bend, rate float64) State {
	t.Helper()
	s, err := m.Stand(0, 0, [2]float64{0.05, 0.3}, 0, -1.0, 0.5)
	if err != nil {
		t.Fatal(err)
	}
	s.KneeLocked[1], s.KneeLatched[1] = false, false
	s.Q[5] = s.Q[3] - bend
	s.V[5] = s.V[3] + rate
	return s
}

// Knee strike, by conservation of angular momentum (the principle; the
// momenta are computed here from the parameters): the only impulses are
// internal to the walker except the ground's at the stance contact, so the
// whole walker's angular momentum about the contact point is conserved;
// the swing leg feels only the hip pin's impulse besides the internal knee
// impulse, so its angular momentum about the hip is conserved; and the
// knee's rate is zero after the strike.
func TestKneeStrikeConservesAngularMomentum(t *testing.T) {
	m, _ := kneedPair(t)
	p := m.Params()
	s := swingKneeState(t, m, 0, 3)
	var ev eval
	m.rhs(&s, &s.Q, &s.V, nil, &ev)
	if !ev.ok {
		t.Fatal("rhs failed")
	}
	contact := ev.geom[0].sp.p
	hip := [2]float64{s.Q[0], s.Q[1]}
	whole0 := angularMomentum(p, &s, contact, -1)
	leg0 := angularMomentum(p, &s, hip, 1)
	ke0, _ := m.Energy(&s)
	var r TickResult
	if m.kneeStrike(&s, 1, &ev, &r) {
		t.Fatalf("knee strike stopped: %v", r.Events[:r.NumEvents])
	}
	whole1 := angularMomentum(p, &s, contact, -1)
	leg1 := angularMomentum(p, &s, hip, 1)
	ke1, _ := m.Energy(&s)
	t.Logf("about the contact %.15g → %.15g, swing leg about the hip %.15g → %.15g kg·m²/s, energy lost %.6g J",
		whole0, whole1, leg0, leg1, ke0-ke1)
	if d := math.Abs(whole1 - whole0); d > 1e-12*math.Max(1, math.Abs(whole0)) {
		t.Errorf("whole walker about the contact: %.15g before, %.15g after", whole0, whole1)
	}
	if d := math.Abs(leg1 - leg0); d > 1e-12*math.Max(1, math.Abs(leg0)) {
		t.Errorf("swing leg about the hip: %.15g before, %.15g after", leg0, leg1)
	}
	if w := s.V[5] - s.V[3]; math.Abs(w) > 1e-12 {
		t.Errorf("knee rate after the strike %.3g rad/s, want 0", w)
	}
	if !s.KneeLocked[1] || s.KneeLatched[1] != p.Legs[1].Shank.Latch {
		t.Errorf("after the strike: locked %v latched %v", s.KneeLocked[1], s.KneeLatched[1])
	}
	// The stance foot either stays (at rest: the impulse is plastic and
	// no-slip) or, had it needed a pulling impulse, leaves the ground.
	var g footGeom
	m.footGeometry(&s.Q, &s.V, 0, s.Seg[0], &g)
	// With the swing thigh ahead, as at a knee strike in walking, the
	// stance foot stays down and, the impulse being plastic and no-slip,
	// at rest.
	if s.Mode[0] != Rolling {
		t.Errorf("stance foot %v after the knee strike, want rolling", s.Mode[0])
	}
	if math.Abs(g.slip) > 1e-12 || math.Abs(g.vn) > 1e-12 {
		t.Errorf("stance foot moves after the strike: slip %.3g, normal %.3g m/s", g.slip, g.vn)
	}
	if r.NumEvents != 1 || r.Events[0].Kind != KneeStrike || !(r.Events[0].EnergyLost > 0) || r.Events[0].Value != 3 {
		t.Errorf("events %+v, want one knee_strike with closing rate 3 and energy lost > 0", r.Events[:r.NumEvents])
	}
	if d := math.Abs(r.Events[0].EnergyLost - (ke0 - ke1)); d > 1e-12*ke0 {
		t.Errorf("event's energy lost %.15g J, energy balance %.15g J", r.Events[0].EnergyLost, ke0-ke1)
	}
}

// Step finds the knee strike of a flexed swing knee closing on its stop
// and locks it there: the knee is straight and still after the tick.
func TestStepLocatesKneeStrike(t *testing.T) {
	m, _ := kneedPair(t)
	s := swingKneeState(t, m, 0.05, 2)
	var r TickResult
	found := false
	for tick := 0; tick < 100 && !found; tick++ {
		m.Step(&s, nil, 1e-3, &r)
		if r.Stopped {
			t.Fatalf("tick %d stopped: %v", tick, r.Events[:r.NumEvents])
		}
		for j := 0; j < r.NumEvents; j++ {
			if e := r.Events[j]; e.Kind == KneeStrike && e.Foot == 1 {
				found = true
				if !(e.Value > 0) {
					t.Errorf("knee strike with closing rate %.3g rad/s", e.Value)
				}
			}
		}
	}
	if !found {
		t.Fatal("no knee strike within 100 ms")
	}
	if !s.KneeLocked[1] {
		t.Fatal("knee not locked after the strike")
	}
	if d := s.Q[5] - s.Q[3]; math.Abs(d) > 1e-9 {
		t.Errorf("knee angle %.3g rad after the strike, want 0", d)
	}
	if w := s.V[5] - s.V[3]; math.Abs(w) > 1e-9 {
		t.Errorf("knee rate %.3g rad/s after the strike, want 0", w)
	}
}

// A passive swing with the knee free conserves T + V (energy balance: no
// input, a rolling stance foot does no work) as well as the compass
// walker's stance does (physics_test.go: relative drift below 1e-9 at the
// default RK4 sub-steps of a 1 ms tick).
func TestUnlockedSwingConservesEnergy(t *testing.T) {
	m, _ := kneedPair(t)
	s := swingKneeState(t, m, 0.6, -1)
	k0, p0 := m.Energy(&s)
	e0 := k0 + p0
	maxK, drift := k0, 0.0
	var r TickResult
	ticks := 0
	for ; ticks < 400; ticks++ {
		m.Step(&s, nil, 1e-3, &r)
		if r.Stopped || r.NumEvents > 0 {
			break
		}
		if s.KneeLocked[1] {
			t.Fatal("the knee locked without an event")
		}
		k, pe := m.Energy(&s)
		maxK = math.Max(maxK, k)
		drift = math.Max(drift, math.Abs(k+pe-e0))
	}
	if ticks < 100 {
		t.Fatalf("only %d ticks of free swing before %v", ticks, r.Events[:r.NumEvents])
	}
	rel := drift / maxK
	t.Logf("%d ms of free-knee swing: max |ΔE| = %.3g J, relative drift %.3g", ticks, drift, rel)
	if rel > 1e-9 {
		t.Errorf("relative energy drift %.3g > 1e-9", rel)
	}
}

// A stance knee held by its stop alone buckles when the lock torque it
// reports would turn negative (the stop would have to pull): Step raises
// knee_buckle and frees the knee exactly when Contacts reported a negative
// KneeTorque, and leaves a knee with a positive one locked. The sweep of
// stance-leg angles must show both signs, or it tests nothing.
func TestStanceKneeBucklesWhenTheStopWouldPull(t *testing.T) {
	m, _ := kneedPair(t)
	p := m.Params()
	for i := range p.Legs {
		p.Legs[i].Shank.Latch = false
	}
	m, err := New(p, Options{IgnoreScuff: true})
	if err != nil {
		t.Fatal(err)
	}
	var pos, neg int
	for _, th := range []float64{-0.3, -0.15, 0, 0.15, 0.3} {
		s, err := m.Stand(0, 0, [2]float64{th, -th}, 0, -1, 0)
		if err != nil {
			t.Fatal(err)
		}
		if !s.KneeLocked[0] || s.KneeLatched[0] {
			t.Fatalf("stance knee locked %v latched %v, want locked without a latch", s.KneeLocked[0], s.KneeLatched[0])
		}
		s.KneeLatched[1] = true // keep the swing knee out of it
		tau := m.Contacts(&s, nil)[0].KneeTorque
		var r TickResult
		m.Step(&s, nil, 1e-4, &r)
		buckled := false
		for j := 0; j < r.NumEvents; j++ {
			if e := r.Events[j]; e.Kind == KneeBuckle && e.Foot == 0 {
				buckled = true
				if e.Value > 0 {
					t.Errorf("θ = %g: knee_buckle with lock torque %.3g N·m > 0", th, e.Value)
				}
			}
		}
		t.Logf("stance leg at %+.2f rad: lock torque %.4g N·m, buckled %v", th, tau, buckled)
		if tau < 0 {
			neg++
			if !buckled || s.KneeLocked[0] {
				t.Errorf("θ = %g: lock torque %.3g N·m but buckled %v, locked %v", th, tau, buckled, s.KneeLocked[0])
			}
		} else {
			pos++
			if buckled || !s.KneeLocked[0] {
				t.Errorf("θ = %g: lock torque %.3g N·m but buckled %v, locked %v", th, tau, buckled, s.KneeLocked[0])
			}
		}
	}
	if pos == 0 || neg == 0 {
		t.Errorf("the sweep gave %d positive and %d negative lock torques; it needs both", pos, neg)
	}
}

// A bad shank is refused with the field that is wrong.
func TestShankValidation(t *testing.T) {
	kneed, _ := kneedPair(t)
	for _, c := range []struct {
		field string
		edit  func(p *Params)
	}{
		{"Legs[0].Shank.Length", func(p *Params) { p.Legs[0].Shank.Length = 0 }},
		{"Legs[1].Shank.Mass", func(p *Params) { p.Legs[1].Shank.Mass = math.NaN() }},
		{"Legs[0].Shank.Inertia", func(p *Params) { p.Legs[0].Shank.Mass, p.Legs[0].Shank.Inertia = 0, 0 }},
		{"Legs[1].FootRadius", func(p *Params) { p.Legs[1].FootRadius = 0.5 }}, // longer than the 0.45 m shank
		{"Legs[0].ArcOffset", func(p *Params) { p.Legs[0].ArcOffset = -0.5 }},
	} {
		p := kneed.Params()
		c.edit(&p)
		var pe *ParamError
		if err := p.Validate(); !errors.As(err, &pe) || pe.Field != c.field {
			t.Errorf("%s: got %v", c.field, err)
		}
	}
	if err := kneed.Params().Validate(); err != nil {
		t.Errorf("valid kneed walker refused: %v", err)
	}
}

// Energy balance over a passive kneed step (the principle: without input
// and with rolling contact, T + V changes only at the impacts): from just
// after a heel strike, the swing knee free, through its knee strike, to
// the next heel strike, E_end − E_start = −(energy lost at the knee strike
// + at the heel strike), to the integration drift. The step must contain a
// knee strike, or the check proves less than it claims.
func TestKneedStepEnergyBalance(t *testing.T) {
	m, _ := kneedPair(t)
	s, err := m.Stand(0, 0, [2]float64{0.25, -0.3}, 0, -1.3, 0.6)
	if err != nil {
		t.Fatal(err)
	}
	s.KneeLocked[1], s.KneeLatched[1] = false, false
	k0, p0 := m.Energy(&s)
	e0 := k0 + p0
	lost := 0.0
	kinds := map[EventKind]int{}
	var r TickResult
	done := false
	for tick := 0; tick < 3000 && !done; tick++ {
		m.Step(&s, nil, 1e-3, &r)
		if r.Stopped {
			t.Fatalf("tick %d stopped: %v", tick, r.Events[:r.NumEvents])
		}
		for j := 0; j < r.NumEvents; j++ {
			e := r.Events[j]
			kinds[e.Kind]++
			switch e.Kind {
			case KneeStrike:
				lost += e.EnergyLost
			case HeelStrike:
				lost += e.EnergyLost
				done = true
			}
		}
	}
	if !done {
		t.Fatalf("no heel strike in 3 s; events %v", kinds)
	}
	if kinds[KneeStrike] == 0 {
		t.Fatalf("the step had no knee strike (events %v)", kinds)
	}
	// The heel-strike tick goes on after the impact (with the trailing
	// knee held, then possibly unlocking): energy is conserved there too.
	k1, p1 := m.Energy(&s)
	e1 := k1 + p1
	t.Logf("E %.9g → %.9g J, lost at impacts %.6g J, imbalance %.3g J, events %v", e0, e1, lost, e1-e0+lost, kinds)
	if d := math.Abs(e1 - e0 + lost); d > 1e-9*math.Abs(k0) {
		t.Errorf("energy balance off by %.3g J (ΔE %.9g, lost %.9g)", d, e1-e0, lost)
	}
	if !(lost > 0) {
		t.Errorf("no energy lost at the impacts (%.3g J)", lost)
	}
}

package plant

import (
	"errors"
	"math"
	"math/rand"
	"strings"
	"testing"
)

func TestValidateNamesTheParameter(t *testing.T) {
	nan := math.NaN()
	cases := []struct {
		field  string
		change func(p *Params)
	}{
		{"HipMass", func(p *Params) { p.HipMass = -1 }},
		{"Gravity", func(p *Params) { p.Gravity = 0 }},
		{"Legs[0].Length", func(p *Params) { p.Legs[0].Length = 0 }},
		{"Legs[1].Mass", func(p *Params) { p.Legs[1].Mass = nan }},
		{"Legs[1].FootRadius", func(p *Params) { p.Legs[1].FootRadius = 1.2 }},
		{"Legs[0].FootRadius", func(p *Params) { p.Legs[0].FootRadius = -0.1 }},
		{"Legs[0].Inertia", func(p *Params) { p.Legs[0].Inertia = -1 }},
		{"Legs[0].Inertia", func(p *Params) { p.Legs[0].Mass, p.Legs[0].Inertia = 0, 0 }},
		{"Legs[1].ArcOffset", func(p *Params) { p.Legs[1].ArcOffset = math.Inf(1) }},
		{"Torso.Mass", func(p *Params) { p.Torso.Mass = -3 }},
		{"Torso.Inertia", func(p *Params) { p.Torso.Mass, p.Torso.Inertia = 0, 0 }},
		{"Terrain.Segments", func(p *Params) { p.Terrain.Segments = nil }},
		{"Terrain.Segments[0].Length", func(p *Params) { p.Terrain.Segments[0].Length = -1 }},
		{"Terrain.Segments[0].Slope", func(p *Params) { p.Terrain.Segments[0].Slope = 2 }},
		{"Terrain.Segments[0].MuStatic", func(p *Params) { p.Terrain.Segments[0].MuStatic = -0.1 }},
		{"Terrain.Segments[0].MuKinetic", func(p *Params) { p.Terrain.Segments[0].MuKinetic = 0.9 }},
		{"Terrain.Start", func(p *Params) { p.Terrain.Start[0] = nan }},
	}
	for _, c := range cases {
		p := DemoParams()
		c.change(&p)
		err := p.Validate()
		var pe *ParamError
		if !errors.As(err, &pe) || pe.Field != c.field {
			t.Errorf("%s: got %v, want a *ParamError for %s", c.field, err, c.field)
			continue
		}
		if !strings.Contains(err.Error(), c.field) || pe.Reason == "" {
			t.Errorf("%s: message %q does not name the field and a reason", c.field, err)
		}
		if _, err := New(p, Options{}); err == nil {
			t.Errorf("%s: New accepted invalid parameters", c.field)
		}
	}
	if err := DemoParams().Validate(); err != nil {
		t.Errorf("demo parameters: %v", err)
	}
	for _, o := range []Options{{SubSteps: -1}, {FallHipHeight: math.NaN()}, {MinStride: -1}} {
		if _, err := New(DemoParams(), o); err == nil {
			t.Errorf("options %+v accepted", o)
		}
	}
}

func TestStepRejectsBadInput(t *testing.T) {
	m, err := New(DemoParams(), Options{})
	if err != nil {
		t.Fatal(err)
	}
	s0, err := m.Stand(0, 0, [2]float64{0.1, -0.1}, 0)
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name string
		dt   float64
		in   Input
	}{
		{"NaN torque", 1e-3, Input{Torque: [MaxActuators]float64{math.NaN()}}},
		{"infinite torque", 1e-3, Input{Torque: [MaxActuators]float64{0, math.Inf(-1)}}},
		{"NaN push", 1e-3, Input{HipForce: [2]float64{math.NaN(), 0}}},
		{"zero dt", 0, Input{}},
		{"negative dt", -1e-3, Input{}},
		{"NaN dt", math.NaN(), Input{}},
	} {
		s := s0
		var r TickResult
		m.Step(&s, &c.in, c.dt, &r)
		if !r.Stopped || r.NumEvents != 1 || r.Events[0].Kind != BadInput {
			t.Errorf("%s: stopped %v events %v, want one bad_input", c.name, r.Stopped, r.Events[:r.NumEvents])
		}
		if s != s0 {
			t.Errorf("%s: state changed", c.name)
		}
	}
	if _, err := m.Stand(2, 0, [2]float64{}, 0); !errors.Is(err, ErrStand) {
		t.Errorf("stance 2: %v", err)
	}
	if _, err := m.Stand(0, math.NaN(), [2]float64{}, 0); !errors.Is(err, ErrStand) {
		t.Errorf("NaN x: %v", err)
	}
	if _, err := m.Stand(0, 0, [2]float64{}, 0, 1, 2, 3, 4); !errors.Is(err, ErrStand) {
		t.Errorf("too many rates: %v", err)
	}
	if _, err := m.Stand(0, 0, [2]float64{0.5, 0}, 0); !errors.Is(err, ErrStand) {
		t.Errorf("swing foot in the ground: %v", err)
	}
}

func TestStepDoesNotAllocate(t *testing.T) {
	for _, torso := range []bool{false, true} {
		p := DemoParams()
		if !torso {
			p.Torso = nil
		}
		m, err := New(p, Options{})
		if err != nil {
			t.Fatal(err)
		}
		rates := []float64{-1, -1, 0}[:m.NumLinks()]
		s, err := m.Stand(0, 0, [2]float64{0.2, -0.2}, 0, rates...)
		if err != nil {
			t.Fatal(err)
		}
		var in Input
		var r TickResult
		allocs := testing.AllocsPerRun(200, func() { m.Step(&s, &in, 1e-3, &r) })
		if allocs != 0 {
			t.Errorf("torso %v: Step allocates %.1f times per tick", torso, allocs)
		}
	}
}

func TestJointStateAndIMU(t *testing.T) {
	m, err := New(DemoParams(), Options{})
	if err != nil {
		t.Fatal(err)
	}
	s, err := m.Stand(1, 0, [2]float64{-0.25, 0.2}, -0.1, 0.3, -0.4, 0.05)
	if err != nil {
		t.Fatal(err)
	}
	names := m.JointNames()
	if len(names) != 2 || names[0] != "hip_left" || names[1] != "hip_right" {
		t.Fatalf("joint names %v", names)
	}
	angle, rate := make([]float64, 2), make([]float64, 2)
	m.JointState(&s, angle, rate)
	want := []float64{-0.25 - -0.1, 0.2 - -0.1}
	wantRate := []float64{0.3 - 0.05, -0.4 - 0.05}
	for j := range want {
		if math.Abs(angle[j]-want[j]) > 1e-15 || math.Abs(rate[j]-wantRate[j]) > 1e-15 {
			t.Errorf("joint %s: %g, %g; want %g, %g", names[j], angle[j], rate[j], want[j], wantRate[j])
		}
	}
	if pitch, r := m.IMU(&s); pitch != -0.1 || r != 0.05 {
		t.Errorf("IMU %g %g", pitch, r)
	}
	pose := m.Points(&s)
	if d := math.Hypot(pose.Foot[1][0]-pose.Hip[0], pose.Foot[1][1]-pose.Hip[1]); math.Abs(d-0.9) > 1e-12 {
		t.Errorf("right leg drawn %g long", d)
	}
	if pose.TorsoTop[1] <= pose.Hip[1] {
		t.Errorf("torso top %v below the hip %v", pose.TorsoTop, pose.Hip)
	}
	c := m.Contacts(&s, nil)
	if c[1].Mode != Rolling || math.Abs(c[1].Gap) > 1e-12 || c[1].Normal <= 0 {
		t.Errorf("stance contact %+v", c[1])
	}
	// On level ground the contact is straight below the arc centre, so with
	// the right leg 0.2 rad forward the centre of pressure sits 0.2 R back
	// along the arc, toward the heel (geometry of the arc).
	if want := -0.2 * DemoParams().Legs[1].FootRadius; math.Abs(c[1].CoP-want) > 1e-12 {
		t.Errorf("centre of pressure %g m, want %g m", c[1].CoP, want)
	}
}

// TestSlidingCoulomb: an inverted pendulum leaning forward on ground with
// μ_s = 0.1 cannot hold the friction it demands (F_t/N = −tan θ): the
// friction alarm fires, and with ContinueOnSlip the foot slides with
// Coulomb friction F_t = −μ_k N sign(v_slip) (Coulomb's law, common
// practice).
func TestSlidingCoulomb(t *testing.T) {
	p := Params{HipMass: 1, Gravity: 9.81,
		Legs:    [2]Leg{{Length: 1, Mass: 1e-3, COMDist: 1}, {Length: 0.5, Mass: 1e-3, COMDist: 0.5}},
		Terrain: Terrain{Start: [2]float64{-5, 0}, Segments: []Segment{{Length: 10, MuStatic: 0.1, MuKinetic: 0.08}}}}
	for _, cont := range []bool{false, true} {
		m, err := New(p, Options{ContinueOnSlip: cont})
		if err != nil {
			t.Fatal(err)
		}
		s, err := m.Stand(0, 0, [2]float64{-0.05, 0}, 0)
		if err != nil {
			t.Fatal(err)
		}
		var r TickResult
		fired := false
		for i := 0; i < 1000 && !fired; i++ {
			m.Step(&s, nil, 1e-3, &r)
			for k := 0; k < r.NumEvents; k++ {
				if r.Events[k].Kind == FrictionLimit {
					fired = true
					if math.Abs(r.Events[k].Value-1) > 1e-6 || r.Events[k].Limit != 0.1 {
						t.Errorf("friction alarm value %g limit %g, want utilization 1 at the alarm", r.Events[k].Value, r.Events[k].Limit)
					}
				}
			}
		}
		if !fired || r.Stopped == cont {
			t.Fatalf("continue %v: fired %v stopped %v", cont, fired, r.Stopped)
		}
		if !cont {
			continue
		}
		for i := 0; i < 50; i++ {
			m.Step(&s, nil, 1e-3, &r)
		}
		c := r.Contacts[0]
		if c.Mode != Sliding || c.SlipVel == 0 {
			t.Fatalf("mode %v slip %g", c.Mode, c.SlipVel)
		}
		if want := -0.08 * c.Normal * math.Copysign(1, c.SlipVel); math.Abs(c.Tangential-want) > 1e-9*c.Normal {
			t.Errorf("sliding F_t = %g, want −μ_k N sign(v) = %g", c.Tangential, want)
		}
	}
}

// TestStepSurvivesGarbageStates: states with random, huge, NaN or infinite
// values and bad bookkeeping fields must never panic; Step reports what it
// can (usually a fall or a non-finite state).
func TestStepSurvivesGarbageStates(t *testing.T) {
	rng := rand.New(rand.NewSource(3))
	m, err := New(DemoParams(), Options{ContinueOnSlip: true, ContinueOnLiftOff: true})
	if err != nil {
		t.Fatal(err)
	}
	pick := func() float64 {
		switch rng.Intn(8) {
		case 0:
			return math.NaN()
		case 1:
			return math.Inf(1 - 2*rng.Intn(2))
		case 2:
			return 1e300 * (rng.Float64() - 0.5)
		default:
			return 4 * (rng.Float64() - 0.5)
		}
	}
	for trial := 0; trial < 2000; trial++ {
		var s State
		for i := range s.Q {
			s.Q[i], s.V[i] = pick(), pick()
		}
		s.Mode = [2]ContactMode{ContactMode(rng.Intn(5)), ContactMode(rng.Intn(5))}
		s.Stance = rng.Intn(5) - 2
		s.Seg = [2]int{rng.Intn(7) - 3, rng.Intn(7) - 3}
		s.SlipDir = [2]float64{pick(), pick()}
		in := Input{Torque: [MaxActuators]float64{pick(), pick()}}
		var r TickResult
		m.Step(&s, &in, 1e-3, &r)
		m.Contacts(&s, &in)
		m.Energy(&s)
		m.Points(&s)
	}
}

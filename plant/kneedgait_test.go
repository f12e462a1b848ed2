package plant

import (
	"math"
	"math/cmplx"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// kneedGait finds the passive gait of kneedPair's kneed walker (latched
// knees, arc feet, 0.04 rad downhill) from the compass gait of the SciPy
// fixture (README table) as the guess.
func kneedGait(t *testing.T) (*Model, Gait) {
	t.Helper()
	m, _ := kneedPair(t)
	guess, err := m.Stand(0, 0, [2]float64{0.340277, -0.452020}, 0, -1.304869, -0.682743)
	if err != nil {
		t.Fatal(err)
	}
	g, err := FindGait(m, nil, guess, GaitOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if !g.Found {
		t.Fatalf("no gait: residual %.3g after %d iterations", g.Residual, g.Iterations)
	}
	return m, g
}

// The fixed point is a fixed point: one step of the map (StepMap, called
// here directly from the gait's state) returns to it, through the events a
// passive kneed step has — the trailing knee leaving its stop, its knee
// strike, the heel strike — and lands with both knees locked straight, the
// new stance knee latched and the trailing one held by its stop alone
// (the section's discrete state, as FromReduced builds it).
func TestKneedGaitIsAFixedPoint(t *testing.T) {
	m, g := kneedGait(t)
	res, err := m.StepMap(g.State, nil, GaitOptions{})
	if err != nil {
		t.Fatal(err)
	}
	var kinds []EventKind
	for _, e := range res.Events {
		kinds = append(kinds, e.Kind)
	}
	want := []EventKind{KneeUnlock, KneeStrike, HeelStrike}
	if len(kinds) != len(want) {
		t.Fatalf("events %v, want %v", kinds, want)
	}
	for i := range want {
		if kinds[i] != want[i] || res.Events[i].Foot != 1-g.State.Stance && kinds[i] != HeelStrike {
			t.Fatalf("events %v (feet %+v), want %v of the swing leg", kinds, res.Events, want)
		}
	}
	z0 := m.Reduced(&g.State)
	z1 := m.Reduced(&res.After)
	res0 := 0.0
	for i := range z0 {
		res0 = math.Max(res0, math.Abs(z1[i]-z0[i]))
	}
	t.Logf("fixed point z = %.10f, map residual %.3g, %d Newton iterations", z0, res0, g.Iterations)
	if res0 > 1e-9 {
		t.Errorf("map residual %.3g > 1e-9", res0)
	}
	a, b := g.State, res.After
	st, sw := b.Stance, 1-b.Stance
	if b.Stance == a.Stance || !b.KneeLocked[st] || !b.KneeLatched[st] || !b.KneeLocked[sw] || b.KneeLatched[sw] {
		t.Errorf("after the heel strike: stance %d, locked %v, latched %v; want the stance swapped, both locked, the new stance knee alone latched",
			b.Stance, b.KneeLocked, b.KneeLatched)
	}
	if a.KneeLocked != [2]bool{true, true} || a.KneeLatched[a.Stance] != true || a.KneeLatched[1-a.Stance] {
		t.Errorf("section state from FromReduced: locked %v latched %v", a.KneeLocked, a.KneeLatched)
	}
}

// Energy balance on the periodic passive gait (the work of gravity, a
// handbook formula, and the energy principle: without input and with a
// rolling stance foot T + V changes only at the impacts): per step the
// walker moves down the slope by one step length with its configuration
// repeated (legs swapped, and they are alike), so the energy lost at the
// knee strike plus at the heel strike equals m_total g d sin|γ|, to the
// integrator's tolerance. It is checked twice: against that formula, and
// against T + V from Model.Energy at the two sections.
func TestKneedGaitEnergyBalance(t *testing.T) {
	m, g := kneedGait(t)
	p := m.Params()
	mt := p.HipMass
	for _, l := range p.Legs {
		mt += l.Mass + l.Shank.Mass
	}
	slope := p.Terrain.Segments[0].Slope
	released := mt * p.Gravity * g.StepLength * math.Sin(-slope)
	lost := g.EnergyLost + g.KneeStrikeEnergyLost
	res, err := m.StepMap(g.State, nil, GaitOptions{})
	if err != nil {
		t.Fatal(err)
	}
	k0, v0 := m.Energy(&g.State)
	k1, v1 := m.Energy(&res.After)
	t.Logf("lost at knee strike %.9f J + heel strike %.9f J = %.9f J; potential energy released m g d sin|γ| = %.9f J; ΔE between sections %.9f J",
		g.KneeStrikeEnergyLost, g.EnergyLost, lost, released, (k1+v1)-(k0+v0))
	if !(g.KneeStrikeEnergyLost > 0) || !(g.EnergyLost > 0) {
		t.Fatalf("energy lost at knee strike %g J, at heel strike %g J: both must be positive", g.KneeStrikeEnergyLost, g.EnergyLost)
	}
	if d := math.Abs(lost - released); d > 1e-8*released {
		t.Errorf("impacts lose %.12g J, gravity releases %.12g J per step (off by %.3g)", lost, released, d)
	}
	if d := math.Abs((k1 + v1) - (k0 + v0) + lost); d > 1e-8*released {
		t.Errorf("T + V changed by %.12g J between the sections, the impacts lost %.12g J", (k1+v1)-(k0+v0), lost)
	}
}

// The kneed map's Jacobian (central differences of the whole map, see
// kneedgait.go) does not depend on the difference step beyond the
// integrator's noise: the default step 1e-4 and 3e-5 agree to 1e-5, and
// the eigenvalues FindGait reports are those of MapJacobian. The fixed
// point is stable, as the independent SciPy computation finds
// (TestKneedGaitMatchesSciPy).
func TestKneedMapJacobianStep(t *testing.T) {
	m, g := kneedGait(t)
	if r, c := g.Jacobian.Dims(); r != 4 || c != 4 {
		t.Fatalf("Jacobian %d×%d, want 4×4 (thigh angles and rates; the knees are straight on the section)", r, c)
	}
	jf, err := m.MapJacobianFD(g.State, nil, GaitOptions{}, 3e-5)
	if err != nil {
		t.Fatal(err)
	}
	var d mat.Dense
	d.Sub(g.Jacobian, jf)
	diff := mat.Norm(&d, math.Inf(1)) / mat.Norm(g.Jacobian, math.Inf(1))
	t.Logf("eigenvalues %.6f; |J(1e-4) − J(3e-5)|/|J| = %.3g; min stance knee torque %.4f N·m",
		g.Eigenvalues, diff, g.MinStanceKneeTorque)
	if diff > 1e-5 {
		t.Errorf("map Jacobian depends on the difference step: relative change %.3g", diff)
	}
	if !g.Stable || cmplx.Abs(g.Eigenvalues[0]) >= 1 {
		t.Errorf("the passive kneed gait is not stable: %v", g.Eigenvalues)
	}
}

// The minimum stance knee-lock torque, a figure a user decides on, against
// an independent computation inside this package: the real-time path
// (Model.Step with its fixed-step RK4 at 0.1 ms ticks, reporting
// FootContact.KneeTorque) walked from the gait's state to the heel strike.
// The two sample the torque at different instants, so they agree to the
// change of the torque over one tick. (The least torque comes just after
// the heel strike, so the section state itself is sampled too.)
func TestKneedGaitMinKneeTorqueFromTicks(t *testing.T) {
	m, g := kneedGait(t)
	s := g.State
	st := s.Stance
	minTau := m.Contacts(&s, nil)[st].KneeTorque // at the section, before the first tick
	var r TickResult
	for tick := 0; tick < 20000; tick++ {
		m.Step(&s, nil, 1e-4, &r)
		if r.Stopped {
			t.Fatalf("tick %d stopped: %v", tick, r.Events[:r.NumEvents])
		}
		if s.Stance != st {
			break
		}
		minTau = math.Min(minTau, r.Contacts[st].KneeTorque)
	}
	t.Logf("min stance knee torque: gait finder %.6f N·m, ticks %.6f N·m", g.MinStanceKneeTorque, minTau)
	if !(g.MinStanceKneeTorque < 0) {
		t.Errorf("min stance knee torque %.4g N·m: an arc foot centred on the shank axis needs the latch to pull early in stance", g.MinStanceKneeTorque)
	}
	if d := math.Abs(minTau - g.MinStanceKneeTorque); d > 2e-3*math.Abs(minTau) {
		t.Errorf("min stance knee torque %.6f N·m from the gait finder, %.6f from the ticks", g.MinStanceKneeTorque, minTau)
	}
}

package plant

import (
	"math"
	"testing"
)

// beltWalker is the passive walker with curved feet of ExampleFindGait on
// a terrain of one segment of the given slope, a belt or fixed ground,
// with the given gravity.
func beltWalker(t testing.TB, slope, gravity float64, start [2]float64, belt bool) *Model {
	leg := Leg{Length: 0.9, Mass: 3, COMDist: 0.4, Inertia: 0.2, FootRadius: 0.3}
	p := Params{HipMass: 10, Legs: [2]Leg{leg, leg}, Gravity: gravity,
		Terrain: Terrain{Start: start, Segments: []Segment{{Length: 1000, Slope: slope, MuStatic: 1, MuKinetic: 0.8, Belt: belt}}}}
	m, err := New(p, Options{IgnoreScuff: true})
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// passiveGait is the walker's natural gait on a 0.05 rad downhill (found on
// fixed ground), just after heel strike.
func passiveGait(t testing.TB, m *Model) State {
	guess, err := m.Stand(0, 0, [2]float64{0.4, -0.5}, 0, -1.4, -0.6)
	if err != nil {
		t.Fatal(err)
	}
	g, err := FindGait(m, nil, guess, GaitOptions{})
	if err != nil || !g.Found {
		t.Fatalf("no gait: %v", err)
	}
	return g.State
}

// frame maps a state of the belt run into the frame in which it is
// compared with the fixed-ground run: subtract the belt surface's
// displacement d and velocity u (along the tangent tt), then rotate
// clockwise by phi (angles θ − φ).
func frame(s State, n int, tt [2]float64, d, u, phi float64) (q, v [MaxDOF]float64) {
	q, v = s.Q, s.V
	q[0] -= d * tt[0]
	q[1] -= d * tt[1]
	v[0] -= u * tt[0]
	v[1] -= u * tt[1]
	c, sn := math.Cos(phi), math.Sin(phi)
	q[0], q[1] = q[0]*c+q[1]*sn, -q[0]*sn+q[1]*c
	v[0], v[1] = v[0]*c+v[1]*sn, -v[0]*sn+v[1]*c
	for i := 2; i < n; i++ {
		q[i] -= phi
	}
	return q, v
}

// compareRuns steps a belt run and a fixed-ground run side by side for
// ticks 1 ms ticks and fails at the first tick where the belt run, mapped
// by toFixed, differs from the fixed-ground run by more than tol (m, rad,
// m/s, rad/s), where a contact force differs by more than tol × the
// walker's weight, or where the events differ. It returns the number of
// heel strikes and the ticks run.
func compareRuns(t *testing.T, mb, mf *Model, sb, sf State, motion func(tick int) BeltMotion,
	toFixed func(s State) (q, v [MaxDOF]float64), ticks int, tol float64) (heels, ran int) {
	t.Helper()
	var in Input
	var rb, rf TickResult
	weight := 16 * mf.Params().Gravity
	worst := 0.0
	for k := 0; k < ticks; k++ {
		in.Belt = motion(k)
		mb.Step(&sb, &in, 1e-3, &rb)
		mf.Step(&sf, nil, 1e-3, &rf)
		if rb.NumEvents != rf.NumEvents || rb.Stopped != rf.Stopped {
			t.Fatalf("tick %d: belt events %v (stopped %v), fixed ground %v (stopped %v)", k,
				rb.Events[:rb.NumEvents], rb.Stopped, rf.Events[:rf.NumEvents], rf.Stopped)
		}
		for e := 0; e < rb.NumEvents; e++ {
			eb, ef := rb.Events[e], rf.Events[e]
			if eb.Kind != ef.Kind || eb.Foot != ef.Foot || math.Abs(eb.T-ef.T) > tol ||
				math.Abs(eb.Value-ef.Value) > tol || math.Abs(eb.EnergyLost-ef.EnergyLost) > tol*weight {
				t.Fatalf("tick %d: belt event %+v, fixed-ground event %+v", k, eb, ef)
			}
			if eb.Kind == HeelStrike {
				heels++
			}
		}
		q, v := toFixed(sb)
		for i := 0; i < mf.NumDOF(); i++ {
			d := math.Max(math.Abs(q[i]-sf.Q[i]), math.Abs(v[i]-sf.V[i]))
			worst = math.Max(worst, d)
			if !(d <= tol) {
				t.Fatalf("tick %d, t = %.3f s: coordinate %d relative to the belt (%.15g, %.15g), on fixed ground (%.15g, %.15g)",
					k, sb.T, i, q[i], v[i], sf.Q[i], sf.V[i])
			}
		}
		for f := 0; f < 2; f++ {
			cb, cf := rb.Contacts[f], rf.Contacts[f]
			if cb.Mode != cf.Mode || math.Abs(cb.Normal-cf.Normal) > tol*weight ||
				math.Abs(cb.Tangential-cf.Tangential) > tol*weight || math.Abs(cb.SlipVel-cf.SlipVel) > tol {
				t.Fatalf("tick %d foot %d: belt contact %+v, fixed-ground contact %+v", k, f, cb, cf)
			}
		}
		ran = k + 1
		if rb.Stopped {
			break
		}
	}
	t.Logf("%d ticks, %d heel strikes, largest state difference %.3g", ran, heels, worst)
	return heels, ran
}

// TestBeltGalileanInvariance: a belt of constant speed is fixed ground seen
// from a frame moving with the belt (Galilean invariance of Newtonian
// mechanics): started from the same state relative to the surface, the
// motion relative to the belt equals the motion on fixed ground, with the
// same contact forces and events, over more than 10 passive steps on a
// downhill belt. Both speeds: a belt running backward (as a treadmill) and
// one running forward.
func TestBeltGalileanInvariance(t *testing.T) {
	const slope = -0.05
	mf := beltWalker(t, slope, 9.81, [2]float64{-100, 0}, false)
	mb := beltWalker(t, slope, 9.81, [2]float64{-100, 0}, true)
	gait := passiveGait(t, mf)
	tt := [2]float64{math.Cos(slope), math.Sin(slope)}
	for _, speed := range []float64{1.03, -0.4} {
		sb := gait
		mb.MoveWithBelt(&sb, speed)
		u := -speed
		heels, _ := compareRuns(t, mb, mf, sb, gait,
			func(int) BeltMotion { return BeltMotion{Speed: speed} },
			func(s State) (q, v [MaxDOF]float64) { return frame(s, mf.NumDOF(), tt, u*s.T, u, 0) },
			12000, 1e-9)
		if heels < 10 {
			t.Errorf("speed %g: %d heel strikes, want at least 10", speed, heels)
		}
	}
}

// TestBeltAccelerationIsTiltedGravity: d'Alembert's principle. In the
// frame of a level belt whose surface accelerates backward at a_b, every
// mass feels the inertial force +m a_b x̂ besides gravity: the walker moves
// relative to the belt exactly as on fixed ground under gravity tilted
// forward by φ = atan(a_b/g) and scaled to √(g² + a_b²), which is fixed
// ground sloping down by φ under that gravity, seen rotated by φ. Here
// a_b = g tan 0.05, so the equivalent ground is the 0.05 rad downhill of the
// walker's passive gait and the run covers several stance phases; the
// belt starts at 0.3 m/s. Positions, velocities, contact forces and events
// agree to 1e-9.
func TestBeltAccelerationIsTiltedGravity(t *testing.T) {
	const g, phi, v0 = 9.81, 0.05, 0.3
	a := g * math.Tan(phi)
	gEff := math.Hypot(g, a)
	mb := beltWalker(t, 0, g, [2]float64{-100, 0}, true)
	c, sn := math.Cos(phi), math.Sin(phi)
	// The fixed ground is the belt's line rotated clockwise by φ.
	mf := beltWalker(t, -phi, gEff, [2]float64{-100 * c, 100 * sn}, false)
	gait := passiveGait(t, mf) // a stance state on the slope, from fixed ground
	// The same state in the belt's (unrotated) frame: rotate back by −φ
	// and add the belt's initial surface velocity.
	sb, err := mb.Stand(gait.Stance, 0, [2]float64{gait.Q[2] + phi, gait.Q[3] + phi}, 0, gait.V[2], gait.V[3])
	if err != nil {
		t.Fatal(err)
	}
	qb, vb := frame(sb, mb.NumDOF(), [2]float64{1, 0}, 0, 0, phi)
	sf := gait
	sf.Q, sf.V = qb, vb
	sf, err = standLike(mf, sf)
	if err != nil {
		t.Fatal(err)
	}
	mb.MoveWithBelt(&sb, v0)
	heels, ran := compareRuns(t, mb, mf, sb, sf,
		func(k int) BeltMotion { return BeltMotion{Speed: v0 + a*float64(k)*1e-3, Accel: a} },
		func(s State) (q, v [MaxDOF]float64) {
			u := -(v0 + a*s.T)
			d := -(v0*s.T + 0.5*a*s.T*s.T)
			return frame(s, mb.NumDOF(), [2]float64{1, 0}, d, u, phi)
		}, 3000, 1e-9)
	if heels < 1 || ran < 3000 {
		t.Errorf("%d ticks and %d heel strikes: want a full run with at least one stance phase", ran, heels)
	}
}

// standLike rebuilds a fixed-ground state with Stand from the angles and
// rates of s (so its bookkeeping is Stand's) and checks that the hip lands
// where s has it: the two constructions of the initial state agree.
func standLike(m *Model, s State) (State, error) {
	out, err := m.Stand(s.Stance, s.Q[0], [2]float64{s.Q[2], s.Q[3]}, 0, s.V[2], s.V[3])
	if err != nil {
		return out, err
	}
	if math.Abs(out.Q[1]-s.Q[1]) > 1e-12 || math.Abs(out.V[0]-s.V[0]) > 1e-12 || math.Abs(out.V[1]-s.V[1]) > 1e-12 {
		return out, &ParamError{Field: "initial state", Value: out.Q[1] - s.Q[1], Reason: "rotated belt state is not a stance state on the slope"}
	}
	return out, nil
}

// TestBeltPassiveStanceEnergy: energy conservation relative to a belt of
// constant speed (an inertial frame, so the conservation law holds there):
// the setup of TestPassiveStanceEnergy on a belt running at 1.3 m/s, with
// the kinetic energy measured relative to the belt. The drift must stay
// within the same bound as on fixed ground, 1e-9 of the largest kinetic
// energy; both drifts are logged.
//
// The belt's drift (5.5e-12) is larger than fixed ground's (2.3e-14), and
// it is round-off, not the integrator: RK4 integrates the belt's constant
// velocity offset exactly, and the relative motion is the fixed-ground
// motion (TestBeltGalileanInvariance). Measured with a throwaway variant of
// this test (10 s, the same walker on a 60 m segment): on FIXED ground the
// drift grows with the distance from the origin, 2.3e-14 at x = 0,
// 1.5e-13 at x = −13 m, 1.0e-12 at x = −26 m (world coordinates of ten
// metres keep about 30 times fewer digits of the positions the rolling
// constraint differences); the belt at 1.3 m/s carries the walker 13 m
// back, and one started at x = +13 m (ending near the origin) drifts
// 3.4e-12 instead of 5.5e-12. A belt of 1e-6 m/s still drifts 3.6e-13 and
// one of 0.13 m/s 2.3e-13: the belt's branch (the velocity projection onto
// a non-zero right-hand side, the anchor's travel) adds a floor of a few
// 1e-13 whose source we did not isolate. All of it is more than three
// orders of magnitude inside the bound; working in the belt's frame would
// remove the distance part but cost a frame change in every tick.
func TestBeltPassiveStanceEnergy(t *testing.T) {
	const speed = 1.3
	drift := func(belt bool) float64 {
		p := Params{HipMass: 10, Gravity: 9.81,
			Legs: [2]Leg{
				{Length: 1, Mass: 5, COMDist: 0.5, Inertia: 0.4, FootRadius: 1},
				{Length: 0.6, Mass: 2, COMDist: 0.3, Inertia: 0.05, FootRadius: 0.1},
			},
			Terrain: Terrain{Start: [2]float64{-10, 0}, Segments: []Segment{{Length: 20, MuStatic: 5, MuKinetic: 5, Belt: belt}}}}
		m, err := New(p, Options{})
		if err != nil {
			t.Fatal(err)
		}
		s, err := m.Stand(0, 0, [2]float64{0.3, -0.4}, 0, 0.5, -1)
		if err != nil {
			t.Fatal(err)
		}
		var in Input
		if belt {
			m.MoveWithBelt(&s, speed)
			in.Belt.Speed = speed
		}
		energy := func() (k, total float64) {
			r := s
			r.V[0] += speed * boolf(belt) // relative to the belt surface (u = −speed)
			k, pe := m.Energy(&r)
			return k, k + pe
		}
		k0, e0 := energy()
		maxK, worst := k0, 0.0
		var r TickResult
		for i := 0; i < 10000; i++ {
			m.Step(&s, &in, 1e-3, &r)
			if r.NumEvents > 0 {
				t.Fatalf("belt %v, t = %g: unexpected event %v", belt, s.T, r.Events[0].Kind)
			}
			k, e := energy()
			maxK = math.Max(maxK, k)
			worst = math.Max(worst, math.Abs(e-e0))
		}
		return worst / maxK
	}
	fixed, onBelt := drift(false), drift(true)
	t.Logf("10 s passive stance, relative energy drift: fixed ground %.3g, relative to a %.1f m/s belt %.3g", fixed, speed, onBelt)
	if onBelt > 1e-9 {
		t.Errorf("relative energy drift on the belt %.3g > 1e-9", onBelt)
	}
}

func boolf(b bool) float64 {
	if b {
		return 1
	}
	return 0
}

// TestBeltProfile checks the speed profile against values worked out by
// hand: linear interpolation between points, held outside them, and a
// pulse's rise, hold and fall added on top; Motion's acceleration is the
// mean over the tick.
func TestBeltProfile(t *testing.T) {
	p := BeltProfile{
		Points: []BeltPoint{{T: 1, Speed: 1}, {T: 3, Speed: 2}},
		Pulses: []BeltPulse{{Start: 10, Delta: 0.5, Rise: 0.15, Hold: 0.1, Fall: 0.2}},
	}
	if err := p.Validate(); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct{ t, want float64 }{
		{0, 1}, {1, 1}, {2, 1.5}, {2.5, 1.75}, {3, 2}, {9, 2},
		{10.075, 2.25}, {10.15, 2.5}, {10.2, 2.5}, {10.35, 2.25}, {10.45, 2}, {11, 2},
	} {
		if got := p.Speed(c.t); math.Abs(got-c.want) > 1e-12 {
			t.Errorf("Speed(%g) = %.15g, want %g", c.t, got, c.want)
		}
	}
	mo := p.Motion(10, 0.001)
	if math.Abs(mo.Speed-2) > 1e-12 || math.Abs(mo.Accel-0.5/0.15) > 1e-9 {
		t.Errorf("Motion(10, 1 ms) = %+v, want speed 2, acceleration %g", mo, 0.5/0.15)
	}
	bad := []BeltProfile{
		{Points: []BeltPoint{{T: 1, Speed: 1}, {T: 1, Speed: 2}}},
		{Points: []BeltPoint{{T: math.NaN(), Speed: 1}}},
		{Pulses: []BeltPulse{{Start: 1, Delta: 1, Rise: 0, Fall: 1}}},
		{Pulses: []BeltPulse{{Start: 1, Delta: 1, Rise: 1, Fall: 1, Hold: -1}}},
	}
	for i, b := range bad {
		if err := b.Validate(); err == nil {
			t.Errorf("bad profile %d accepted", i)
		}
	}
}

package plant

import (
	"math"
	"testing"
)

// kneedPair returns a kneed walker and the compass walker with the same
// masses lumped into one link per leg: mass m_t + m_s, centre of mass and
// inertia about it by the parallel-axis theorem (handbook formulas). The
// compass leg is the passive walker of testdata/reference/README.md's SciPy
// scenario, with its 3 kg split into a thigh and a shank of our choosing.
func kneedPair(t *testing.T) (kneed, compass *Model) {
	t.Helper()
	const (
		lt, mt, ct, it = 0.45, 1.8, 0.2, 0.03
		ls, ms, cs, is = 0.45, 1.2, 0.25, 0.02
	)
	m := mt + ms
	c := (mt*ct + ms*(lt+cs)) / m
	inertia := it + mt*(ct-c)*(ct-c) + is + ms*(lt+cs-c)*(lt+cs-c)
	ground := Terrain{Segments: []Segment{{Length: 1, Slope: -0.04, MuStatic: 1, MuKinetic: 1}}}
	straight := Leg{Length: lt + ls, Mass: m, COMDist: c, Inertia: inertia, FootRadius: 0.27, ArcOffset: 0.01}
	kneedLeg := Leg{Length: lt, Mass: mt, COMDist: ct, Inertia: it, FootRadius: 0.27, ArcOffset: 0.01,
		Shank: &Shank{Length: ls, Mass: ms, COMDist: cs, Inertia: is, Latch: true}}
	o := Options{IgnoreScuff: true}
	var err error
	compass, err = New(Params{HipMass: 10, Gravity: 9.81, Terrain: ground, Legs: [2]Leg{straight, straight}}, o)
	if err != nil {
		t.Fatal(err)
	}
	kneed, err = New(Params{HipMass: 10, Gravity: 9.81, Terrain: ground, Legs: [2]Leg{kneedLeg, kneedLeg}}, o)
	if err != nil {
		t.Fatal(err)
	}
	return kneed, compass
}

// With both knees latched for the whole step (through the heel-strike
// impulse too) the kneed walker is the compass walker: the same passive
// step to rounding (period, step length, ground forces every tick, the
// state just after the heel strike). The step is taken twice: the first
// pass finds the heel strike, the second ends its last tick 0.1 ns after
// it, before the trailing knee, whose latch released as its foot left the
// ground, could bend.
func TestLockedKneesReproduceCompassStep(t *testing.T) {
	kneed, compass := kneedPair(t)
	first := lockedStep(t, kneed, compass, -1)
	lockedStep(t, kneed, compass, first)
}

// lockedStep takes one passive step of both walkers and compares them;
// with end > 0 the last tick ends at end + 0.1 ns. It returns the time of
// the heel strike.
func lockedStep(t *testing.T, kneed, compass *Model, end float64) float64 {
	t.Helper()
	// Near the stable passive gait of the SciPy fixture (README table).
	legs := [2]float64{0.340277, -0.452020}
	rates := []float64{-1.304869, -0.682743}
	sk, err := kneed.Stand(0, 0, legs, 0, rates...)
	if err != nil {
		t.Fatal(err)
	}
	sc, err := compass.Stand(0, 0, legs, 0, rates...)
	if err != nil {
		t.Fatal(err)
	}
	if !sk.KneeLocked[0] || !sk.KneeLocked[1] || !sk.KneeLatched[0] || sk.KneeLatched[1] {
		t.Fatalf("Stand: knees locked %v latched %v, want both locked and the stance knee latched", sk.KneeLocked, sk.KneeLatched)
	}
	sk.KneeLatched[1] = true // held for the whole swing
	const dt, tol = 1e-3, 1e-9
	var rk, rc TickResult
	strike := -1.0
	var stepK, stepC float64
	for tick := 0; tick < 2000 && strike < 0; tick++ {
		startK, startC := sk.Stance, sc.Stance
		h := dt
		if end > 0 && sk.T+dt > end {
			h = end + 1e-10 - sk.T
		}
		kneed.Step(&sk, nil, h, &rk)
		compass.Step(&sc, nil, h, &rc)
		if rk.Stopped || rc.Stopped {
			t.Fatalf("tick %d: stopped (kneed %v, compass %v)", tick, rk.Events[:rk.NumEvents], rc.Events[:rc.NumEvents])
		}
		var ek, ec *Event
		for j := 0; j < rk.NumEvents; j++ {
			if rk.Events[j].Kind == HeelStrike {
				ek = &rk.Events[j]
			}
		}
		for j := 0; j < rc.NumEvents; j++ {
			if rc.Events[j].Kind == HeelStrike {
				ec = &rc.Events[j]
			}
		}
		// After the impulse the trailing knee's latch has released and its
		// stop lets go (a knee_unlock event), which changes the forces at
		// once: the forces are compared on every tick before the strike.
		for i := 0; i < 2 && ek == nil; i++ {
			a, b := rk.Contacts[i], rc.Contacts[i]
			scale := math.Max(1, math.Hypot(b.Normal, b.Tangential))
			if d := math.Max(math.Abs(a.Normal-b.Normal), math.Abs(a.Tangential-b.Tangential)); d > tol*scale {
				t.Fatalf("tick %d foot %d: forces (%.12g, %.12g) kneed, (%.12g, %.12g) compass", tick, i,
					a.Tangential, a.Normal, b.Tangential, b.Normal)
			}
		}
		if (ek == nil) != (ec == nil) {
			t.Fatalf("tick %d: heel strike in one walker only (kneed %v, compass %v)", tick, ek != nil, ec != nil)
		}
		if ek != nil {
			strike = ek.T
			if d := math.Abs(ek.T - ec.T); d > tol {
				t.Errorf("step period: kneed %.15g s, compass %.15g s", ek.T, ec.T)
			}
			if d := math.Abs(ek.EnergyLost - ec.EnergyLost); d > tol*math.Abs(ec.EnergyLost) {
				t.Errorf("energy lost at heel strike: kneed %.15g J, compass %.15g J", ek.EnergyLost, ec.EnergyLost)
			}
			stepK = rk.Contacts[sk.Stance].Point[0] - rk.Contacts[startK].Point[0]
			stepC = rc.Contacts[sc.Stance].Point[0] - rc.Contacts[startC].Point[0]
		}
	}
	if strike < 0 {
		t.Fatal("no heel strike within 2 s")
	}
	t.Logf("passive step: period %.12g s, step length %.12g m (compass %.12g s, %.12g m)", strike, stepK, strike, stepC)
	if strike < 0.5 || strike > 1.5 {
		t.Errorf("step period %.6g s: not a passive step near the fixture's 0.895 s", strike)
	}
	if end < 0 {
		return strike
	}
	if d := math.Abs(stepK - stepC); d > tol || stepC < 0.3 {
		t.Errorf("step length: kneed %.15g m, compass %.15g m", stepK, stepC)
	}
	// After the impulse the knees are still straight and the thighs move
	// as the compass legs.
	for i := 0; i < 2; i++ {
		sh := 2 + kneed.feet[i].link
		if d := math.Abs(sk.Q[sh] - sk.Q[2+i]); d > tol {
			t.Errorf("leg %d: knee bent by %.3g rad after the step", i, d)
		}
		// The trailing knee was held through the impulse and let go after
		// it: in the 0.1 ns since, its rate grows by at most a knee
		// acceleration (well under 1000 rad/s²) times that time.
		if d := math.Abs(sk.V[sh] - sk.V[2+i]); d > tol+1e3*(sk.T-strike) {
			t.Errorf("leg %d: knee rate %.3g rad/s after the step", i, d)
		}
	}
	closeVec(t, "q after the step", sk.Q[:4], sc.Q[:4], tol)
	closeVec(t, "q̇ after the step", sk.V[:4], sc.V[:4], tol)
	if sk.T-strike > 1e-9 {
		t.Errorf("compared %.3g s after the heel strike, want ≤ 1 ns", sk.T-strike)
	}
	return strike
}

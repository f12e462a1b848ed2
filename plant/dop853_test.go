package plant

import (
	"math"
	"testing"
)

// TestDOP853Order checks the DOP853 coefficients: with a fixed step on a
// smooth problem (the half-disk of TestDormandPrinceOrder rocking at large
// amplitude) the global error of the eighth-order solution must fall by
// about 2⁸ = 256 when the step halves (a wrong coefficient drops the
// order), and the error estimate must shrink like a local error of order ≥
// 6. The reference is the same method with a step 16 times smaller.
// (From 16 to 32 steps of 2 s the errors are about 7e-9 and 2e-11.)
func TestDOP853Order(t *testing.T) {
	const R, mass = 0.5, 2.0
	d := 4 * R / (3 * math.Pi)
	p := Params{OneLeg: true, Gravity: 9.81,
		Legs:    [2]Leg{{Length: R, Mass: mass, COMDist: d, Inertia: 0.5*mass*R*R - mass*d*d, FootRadius: R}},
		Terrain: Terrain{Start: [2]float64{-5, 0}, Segments: []Segment{{Length: 10, MuStatic: 5, MuKinetic: 5}}}}
	m, err := New(p, Options{})
	if err != nil {
		t.Fatal(err)
	}
	s0, err := m.Stand(0, 0, [2]float64{0.6, 0}, 0, 1)
	if err != nil {
		t.Fatal(err)
	}
	const T = 2 // four rocking half-periods, where the error is well above rounding
	run := func(steps int) (phase, float64) {
		s := s0
		x := phase{q: s.Q, v: s.V}
		h := T / float64(steps)
		var ev, k13 eval
		m.evalAt(&s, &x.q, &x.v, nil, &ev)
		worst := 0.0
		for i := 0; i < steps; i++ {
			var out phase
			e := m.dop853Step(&s, &x, &ev, h, nil, 0, 1, &out, &k13)
			worst = math.Max(worst, e)
			x, ev = out, k13
		}
		return x, worst
	}
	ref, _ := run(512)
	errAt := func(steps int) (float64, float64) {
		x, est := run(steps)
		return math.Abs(x.q[2] - ref.q[2]), est
	}
	e1, est1 := errAt(16)
	e2, est2 := errAt(32)
	order := math.Log2(e1 / e2)
	t.Logf("errors %.3g, %.3g: observed order %.2f; error estimates %.3g, %.3g", e1, e2, order, est1, est2)
	if order < 7.5 || order > 9.2 {
		t.Errorf("observed order %.2f, want about 8", order)
	}
	if !(est2 < est1/64) {
		t.Errorf("error estimate %.3g → %.3g does not shrink like a local error of order ≥ 6", est1, est2)
	}
}

package plant

import (
	"math"
	"testing"
)

// TestDormandPrinceOrder checks the Dormand–Prince coefficients: with a
// fixed step on a smooth problem (rockingHalfDisk: a half-disk rocking at
// large amplitude) the global error of the fifth-order solution must fall
// by about 2⁵ = 32 when the step halves (the order of the method; a wrong coefficient drops
// it), and the embedded error estimate must shrink with the step too.
func TestDormandPrinceOrder(t *testing.T) {
	m, s0 := rockingHalfDisk(t)
	const T = 0.5
	run := func(steps int) (phase, float64) {
		s := s0
		x := phase{q: s.Q, v: s.V}
		h := T / float64(steps)
		var ev, k7 eval
		worst := 0.0
		for i := 0; i < steps; i++ {
			m.evalAt(&s, &x.q, &x.v, nil, &ev)
			var out phase
			e := m.dopriStep(&s, &x, &ev, h, nil, 0, 1, &out, &k7)
			worst = math.Max(worst, e)
			x = out
		}
		return x, worst
	}
	ref, _ := run(512)
	errAt := func(steps int) (float64, float64) {
		x, est := run(steps)
		return math.Abs(x.q[2] - ref.q[2]), est
	}
	e1, est1 := errAt(32)
	e2, est2 := errAt(64)
	order := math.Log2(e1 / e2)
	t.Logf("errors %.3g, %.3g: observed order %.2f; error estimates %.3g, %.3g", e1, e2, order, est1, est2)
	if order < 4.5 || order > 6 {
		t.Errorf("observed order %.2f, want about 5", order)
	}
	if !(est2 < est1/16) {
		t.Errorf("embedded error estimate %.3g → %.3g does not shrink like a local error of order ≥ 4", est1, est2)
	}
}

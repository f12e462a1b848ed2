package plant

import (
	"math"
	"testing"
)

// TestDOP853Order checks the DOP853 coefficients: with a fixed step on a
// smooth problem (the half-disk of rockingHalfDisk rocking at large
// amplitude) the global error of the eighth-order solution must fall by
// about 2⁸ = 256 when the step halves (a wrong coefficient drops the
// order), and the error estimate must shrink like a local error of order ≥
// 6. The reference is the same method with a step 16 times smaller.
// (From 16 to 32 steps of 2 s the errors are about 7e-9 and 2e-11.)
func TestDOP853Order(t *testing.T) {
	m, s0 := rockingHalfDisk(t)
	const T = 2 // four rocking half-periods, where the error is well above rounding
	run := func(steps int) (phase, float64) {
		s := s0
		x := phase{q: s.Q, v: s.V}
		h := T / float64(steps)
		var ev, k13 eval
		var stg d8Stages
		m.evalAt(&s, &x.q, &x.v, nil, &ev)
		worst := 0.0
		for i := 0; i < steps; i++ {
			var out phase
			e := m.dop853Step(&s, &x, &ev, h, nil, 0, 1, &out, &k13, &stg)
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

// TestDOP853DenseOutput checks the continuous extension used to locate
// events: it passes through both ends of the step, and inside the step
// (at 0.37 h) its error against a converged solution (200 real steps to
// the same time) falls by about 2⁸ each time the step halves, measured
// over four halvings (a local error of order 7 + 1; a wrong weight in d8D
// or d8AExtra drops it to 4 or less). Single halvings scatter (2⁶ … 2⁹.⁷
// here), so the test takes the mean order from h = 0.4 s to 0.025 s.
func TestDOP853DenseOutput(t *testing.T) {
	m, s := rockingHalfDisk(t)
	x0 := phase{q: s.Q, v: s.V}
	var k1 eval
	m.evalAt(&s, &x0.q, &x0.v, nil, &k1)
	converged := func(T float64) phase {
		x, ev := x0, k1
		var k13 eval
		var stg d8Stages
		for i := 0; i < 200; i++ {
			var out phase
			m.dop853Step(&s, &x, &ev, T/200, nil, 0, 1, &out, &k13, &stg)
			x, ev = out, k13
		}
		return x
	}
	const theta = 0.37
	errAt := func(h float64) (inside, ends float64) {
		var stg d8Stages
		var x1, xd phase
		var k13 eval
		m.dop853Step(&s, &x0, &k1, h, nil, 0, 1, &x1, &k13, &stg)
		var dn d8Dense
		if !m.dense853(&s, &x0, &x1, h, nil, &stg, &dn) {
			t.Fatal("dense output failed")
		}
		dn.at(m.n, theta, &xd)
		ref := converged(theta * h)
		for i := 0; i < m.n; i++ {
			inside = math.Max(inside, math.Max(math.Abs(xd.q[i]-ref.q[i]), math.Abs(xd.v[i]-ref.v[i])))
		}
		for _, end := range []struct {
			theta float64
			want  *phase
		}{{0, &x0}, {1, &x1}} {
			dn.at(m.n, end.theta, &xd)
			for i := 0; i < m.n; i++ {
				ends = math.Max(ends, math.Max(math.Abs(xd.q[i]-end.want.q[i]), math.Abs(xd.v[i]-end.want.v[i])))
			}
		}
		return
	}
	e1, ends1 := errAt(0.4)
	e2, ends2 := errAt(0.025)
	order := math.Log2(e1/e2) / 4
	t.Logf("interpolant error at %.2f h: %.3g (h = 0.4 s), %.3g (h = 0.025 s): mean order %.2f; at the ends %.3g, %.3g", theta, e1, e2, order, ends1, ends2)
	if ends1 > 1e-14 || ends2 > 1e-14 {
		t.Errorf("the interpolant misses the ends of the step by %.3g, %.3g", ends1, ends2)
	}
	if order < 7 || order > 9.5 {
		t.Errorf("interpolation error falls with mean order %.2f when the step halves, want about 8", order)
	}
}

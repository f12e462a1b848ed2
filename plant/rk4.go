package plant

// phase is a point (q, q̇) of the state space.
type phase struct {
	q, v [MaxDOF]float64
}

// rk4 advances x0 by one classical fourth-order Runge–Kutta step of size h
// with the contact modes of s held fixed and the input held constant (zero-
// order hold). k1 is the evaluation at x0, which the caller already has.
// It reports false if an evaluation failed.
func (m *Model) rk4(s *State, x0 *phase, k1 *eval, h float64, in *Input, out *phase) bool {
	n := m.n
	var x phase
	var k eval // one scratch evaluation: each stage needs only its q̈
	var sumV, sumA [MaxDOF]float64
	for i := 0; i < n; i++ {
		x.q[i] = x0.q[i] + 0.5*h*x0.v[i]
		x.v[i] = x0.v[i] + 0.5*h*k1.acc[i]
		sumV[i], sumA[i] = x0.v[i], k1.acc[i]
	}
	ok := true
	for stage, c := range [3]float64{0.5, 1, 0} {
		m.rhsGeom(s, &x.q, &x.v, in, &k, false)
		ok = ok && k.ok
		w := 2.0
		if stage == 2 {
			w = 1
		}
		for i := 0; i < n; i++ {
			vi := x.v[i]
			sumV[i] += w * vi
			sumA[i] += w * k.acc[i]
			if stage < 2 {
				x.q[i] = x0.q[i] + c*h*vi
				x.v[i] = x0.v[i] + c*h*k.acc[i]
			}
		}
	}
	for i := 0; i < n; i++ {
		out.q[i] = x0.q[i] + h/6*sumV[i]
		out.v[i] = x0.v[i] + h/6*sumA[i]
	}
	return ok
}

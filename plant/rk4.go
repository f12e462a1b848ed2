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
	var k2, k3, k4 eval
	for i := 0; i < n; i++ {
		x.q[i] = x0.q[i] + 0.5*h*x0.v[i]
		x.v[i] = x0.v[i] + 0.5*h*k1.acc[i]
	}
	v2 := x.v
	m.rhs(s, &x.q, &x.v, in, &k2)
	for i := 0; i < n; i++ {
		x.q[i] = x0.q[i] + 0.5*h*v2[i]
		x.v[i] = x0.v[i] + 0.5*h*k2.acc[i]
	}
	v3 := x.v
	m.rhs(s, &x.q, &x.v, in, &k3)
	for i := 0; i < n; i++ {
		x.q[i] = x0.q[i] + h*v3[i]
		x.v[i] = x0.v[i] + h*k3.acc[i]
	}
	v4 := x.v
	m.rhs(s, &x.q, &x.v, in, &k4)
	for i := 0; i < n; i++ {
		out.q[i] = x0.q[i] + h/6*(x0.v[i]+2*v2[i]+2*v3[i]+v4[i])
		out.v[i] = x0.v[i] + h/6*(k1.acc[i]+2*k2.acc[i]+2*k3.acc[i]+k4.acc[i])
	}
	return k2.ok && k3.ok && k4.ok
}

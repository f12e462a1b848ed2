package plant

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// MapJacobian returns ∂P/∂z, the Jacobian of the step-to-step map in the
// coordinates of Model.Reduced, at the state s just after a heel strike.
//
// It integrates the variational equations Φ̇ = A(x(t)) Φ along the step
// (x = (q, q̇), A = ∂f/∂x from central differences of the right-hand side,
// classical RK4 with at most 2e-3 √(L/g) per step, ending exactly at the
// located heel-strike time), then applies the event-time (saltation)
// correction and the derivative of the impact map:
//
//	∂x⁺/∂x₀ = DΔ · (I − f⁻ ∇g / (∇g · f⁻)) · Φ(t*)
//
// with g the swing foot's gap (∇g = (J_n, 0)) and f⁻ the vector field just
// before the impact. The derivatives of the algebraic maps (the impact and
// the construction of the state from z) are central differences.
//
// For a walker with knees it returns central differences of the whole map
// (relative step 1e-4) in the free coordinates of the section: Reduced
// without the shank entries (kneedgait.go derives why).
func (m *Model) MapJacobian(s State, policy Policy, o GaitOptions) (*mat.Dense, error) {
	if err := o.validate(); err != nil {
		return nil, err
	}
	o = o.withDefaults(m)
	if m.nKnees > 0 {
		return m.kneedMapJacobian(s, policy, o, kneedJacStep)
	}
	n := m.n
	nx := 2 * n
	dim := 2 * m.nLinks
	stance, x := s.Stance, s.Q[0]
	z0 := m.Reduced(&s)
	start, err := m.FromReduced(z0, stance, x)
	if err != nil {
		return nil, err
	}
	// Nominal step: heel-strike time, state just before the impact.
	var before State
	var beforeSet bool
	res, err := m.stepMap(start, policy, o, func(st *State, ev *eval) {
		if st.Stance == start.Stance && !beforeSet {
			before = *st
		}
		if st.Stance != start.Stance {
			beforeSet = true
		}
	})
	if err != nil {
		return nil, err
	}
	for _, e := range res.Events {
		if e.Kind != Scuff && e.Kind != HeelStrike {
			return nil, fmt.Errorf("plant: the step has a %s event; the variational map needs a step whose only contact change is the heel strike", e.Kind)
		}
	}
	tStar := res.After.T
	swing := res.After.Stance
	if before.T != tStar {
		return nil, fmt.Errorf("plant: internal: the state before the heel strike was not recorded")
	}

	// DC = ∂x₀/∂z by central differences of FromReduced.
	DC := mat.NewDense(nx, dim, nil)
	if j, err := centralDiff(DC, z0, 1e-6, func(z, out []float64) error {
		st, err := m.FromReduced(z, stance, x)
		if err != nil {
			return err
		}
		for i := 0; i < n; i++ {
			out[i], out[n+i] = st.Q[i], st.V[i]
		}
		return nil
	}); err != nil {
		return nil, fmt.Errorf("plant: map Jacobian: cannot perturb coordinate %d", j)
	}

	// Φ(t*) by RK4 on the augmented system (x, Φ), modes of the start state.
	modes := start
	T := tStar - start.T
	steps := int(math.Ceil(T / (2e-3 * math.Sqrt(m.reach/m.p.Gravity))))
	if steps < 8 {
		steps = 8
	}
	h := T / float64(steps)
	xs := make([]float64, nx)
	for i := 0; i < n; i++ {
		xs[i], xs[n+i] = start.Q[i], start.V[i]
	}
	Phi := mat.NewDense(nx, nx, nil)
	for i := 0; i < nx; i++ {
		Phi.Set(i, i, 1)
	}
	field := func(x []float64, P *mat.Dense, dx []float64, dP *mat.Dense) bool {
		if !m.field(&modes, policy, x, dx) {
			return false
		}
		A := m.fieldJacobian(&modes, policy, x)
		if A == nil {
			return false
		}
		dP.Mul(A, P)
		return true
	}
	k := make([][]float64, 4)
	kP := make([]*mat.Dense, 4)
	for i := range k {
		k[i] = make([]float64, nx)
		kP[i] = mat.NewDense(nx, nx, nil)
	}
	xt := make([]float64, nx)
	Pt := mat.NewDense(nx, nx, nil)
	for st := 0; st < steps; st++ {
		cs := [4]float64{0, 0.5, 0.5, 1}
		for stage := 0; stage < 4; stage++ {
			for i := 0; i < nx; i++ {
				xt[i] = xs[i]
				if stage > 0 {
					xt[i] += cs[stage] * h * k[stage-1][i]
				}
			}
			Pt.Copy(Phi)
			if stage > 0 {
				var tmp mat.Dense
				tmp.Scale(cs[stage]*h, kP[stage-1])
				Pt.Add(Pt, &tmp)
			}
			if !field(xt, Pt, k[stage], kP[stage]) {
				return nil, fmt.Errorf("plant: map Jacobian: the variational integration failed at step %d", st)
			}
		}
		w := [4]float64{1, 2, 2, 1}
		for stage := 0; stage < 4; stage++ {
			for i := 0; i < nx; i++ {
				xs[i] += h / 6 * w[stage] * k[stage][i]
			}
			var tmp mat.Dense
			tmp.Scale(h/6*w[stage], kP[stage])
			Phi.Add(Phi, &tmp)
		}
	}

	// Saltation: the event time moves with the initial state.
	xb := make([]float64, nx)
	for i := 0; i < n; i++ {
		xb[i], xb[n+i] = before.Q[i], before.V[i]
	}
	fm := make([]float64, nx)
	if !m.field(&before, policy, xb, fm) {
		return nil, fmt.Errorf("plant: map Jacobian: no vector field before the impact")
	}
	var g footGeom
	m.footGeometry(&before.Q, &before.V, swing, before.Seg[swing], &g)
	grad := make([]float64, nx)
	copy(grad, g.jn[:n])
	gf := 0.0
	for i := 0; i < nx; i++ {
		gf += grad[i] * fm[i]
	}
	if math.Abs(gf) < 1e-14 {
		return nil, fmt.Errorf("plant: map Jacobian: the heel strike is grazing (dg/dt = %g)", gf)
	}
	S := mat.NewDense(nx, nx, nil)
	for i := 0; i < nx; i++ {
		for j := 0; j < nx; j++ {
			v := -fm[i] * grad[j] / gf
			if i == j {
				v++
			}
			S.Set(i, j, v)
		}
	}

	// DΔ by central differences of the impact map.
	DD := mat.NewDense(nx, nx, nil)
	impactOf := func(xin []float64, out []float64) bool {
		st := before
		for i := 0; i < n; i++ {
			st.Q[i], st.V[i] = xin[i], xin[n+i]
		}
		var ev eval
		m.evalAt(&st, &st.Q, &st.V, policy, &ev)
		var r TickResult
		if m.impact(&st, swing, true, &ev, &r) {
			return false
		}
		for i := 0; i < n; i++ {
			out[i], out[n+i] = st.Q[i], st.V[i]
		}
		return true
	}
	if _, err := centralDiff(DD, xb, 1e-6, func(xin, out []float64) error {
		if !impactOf(xin, out) {
			return errNoValue
		}
		return nil
	}); err != nil {
		return nil, fmt.Errorf("plant: map Jacobian: the impact changes character under a small perturbation")
	}

	// DE: select the link angles and rates, stance first for the new stance.
	DE := mat.NewDense(dim, nx, nil)
	for i := 0; i < m.nLinks; i++ {
		k := m.linkOfReduced(swing, i)
		DE.Set(i, 2+k, 1)
		DE.Set(m.nLinks+i, n+2+k, 1)
	}
	var t1, t2, t3, out mat.Dense
	t1.Mul(S, Phi)
	t2.Mul(DD, &t1)
	t3.Mul(DE, &t2)
	out.Mul(&t3, DC)
	return &out, nil
}

// field evaluates f(x) = (q̇, q̈) for the flat state x = (q, q̇) with the
// contact modes of s.
func (m *Model) field(s *State, pol Policy, x []float64, dx []float64) bool {
	n := m.n
	var q, v [MaxDOF]float64
	copy(q[:n], x[:n])
	copy(v[:n], x[n:2*n])
	var ev eval
	m.evalAt(s, &q, &v, pol, &ev)
	if !ev.ok {
		return false
	}
	copy(dx[:n], v[:n])
	copy(dx[n:2*n], ev.acc[:n])
	return true
}

// fieldJacobian returns ∂f/∂x by central differences (relative step 1e-6:
// truncation ~1e-12, rounding ~1e-10 relative).
func (m *Model) fieldJacobian(s *State, pol Policy, x []float64) *mat.Dense {
	nx := 2 * m.n
	A := mat.NewDense(nx, nx, nil)
	if _, err := centralDiff(A, x, 1e-6, func(xin, out []float64) error {
		if !m.field(s, pol, xin, out) {
			return errNoValue
		}
		return nil
	}); err != nil {
		return nil
	}
	return A
}

// MapJacobianFD returns ∂P/∂z by central differences of the whole
// step-to-step map with relative step h; used to cross-check MapJacobian.
// With knees it is in the free coordinates of the section, like
// MapJacobian.
func (m *Model) MapJacobianFD(s State, policy Policy, o GaitOptions, h float64) (*mat.Dense, error) {
	if err := o.validate(); err != nil {
		return nil, err
	}
	if !(h > 0) || h > 0.1 {
		return nil, perr("h", h, "must be between 0 and 0.1")
	}
	o = o.withDefaults(m)
	if m.nKnees > 0 {
		return m.kneedMapJacobian(s, policy, o, h)
	}
	dim := 2 * m.nLinks
	z0 := m.Reduced(&s)
	J := mat.NewDense(dim, dim, nil)
	if _, err := centralDiff(J, z0, h, func(z, out []float64) error {
		st, err := m.FromReduced(z, s.Stance, s.Q[0])
		if err != nil {
			return err
		}
		res, err := m.stepMap(st, policy, o, nil)
		if err != nil {
			return err
		}
		m.reduced(&res.After, out)
		return nil
	}); err != nil {
		return nil, err
	}
	return J, nil
}

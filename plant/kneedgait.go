package plant

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// The step-to-step map of a kneed walker.
//
// The section is the instant just after a heel strike, as without knees.
// A passive kneed gait of the published kind reaches it with both knees
// locked straight: the swing knee struck its stop (and latched) before the
// heel strike, and every locked knee is held through the heel-strike
// impulse (doc.go), so just after it the new stance knee is latched and
// the trailing knee is held by its stop, its latch released as its foot
// leaves the ground. On the section each shank's angle and rate equal its
// thigh's, and the discrete state (locked, latched) is fixed by the stance.
// Reduced keeps the shank entries (they tell a reader the knees are
// straight), but the map's free coordinates — the ones Newton moves and
// the Jacobian differentiates — are the thigh and torso angles and rates,
// the same as the compass or torso walker's.
//
// Leaving the knee coordinates out of the Jacobian loses no eigenvalue
// other than zeros: a step started with a knee bent or bending (off the
// section) still ends, after its knee strike and the heel strike that
// holds both knees, with both knees straight and still, so the rows of the
// full Jacobian belonging to the knee coordinates are zero; its
// eigenvalues are those of the free block plus one zero per knee
// coordinate.
//
// The Jacobian of a kneed walker's map is taken by central differences of
// the whole map, not from the variational equations. Between the section
// and the next one the kneed step changes its equations three times: the
// trailing knee leaves its stop (its lock torque passes through zero, so
// the vector field is continuous there and the saltation matrix is the
// identity), the swing knee strikes (an impulsive lock: a saltation matrix
// and the derivative of the knee-strike impulse map) and the heel strikes.
// The variational integrator (variational.go) integrates one fixed set of
// modes up to the heel strike; carrying Φ through the knee unlock and the
// knee strike would mean locating both in the variational run and
// differentiating a second impact map, itself by differences. Central
// differences of the whole map differentiate exactly what Newton solves,
// events and all; each evaluation locates its events to 1e-14 s and
// integrates to GaitOptions.Tol (1e-11), so with the relative step
// kneedJacStep the error is about Tol/h + h²·|P'''| ≈ 1e-7. The checks
// (kneedgait_test.go): the Jacobian changes by less than 1e-5 relative
// from step 1e-4 to 3e-5, and its eigenvalues match those of an
// independent SciPy computation to 1e-5 (they agree to about 1e-9). For
// the compass walker variational_test.go shows central differences of the
// whole map agreeing with the variational Jacobian.

// kneedJacStep is the relative difference step of a kneed walker's map
// Jacobian: large enough that the integrator's error (≈ Tol) divided by it
// stays near 1e-7, small enough that the h² truncation error is below it.
const kneedJacStep = 1e-4

// sectionFree returns the positions of z (Model.Reduced) that are free on
// the map's section: all of them without knees; without each shank's angle
// and rate with knees (they equal their thigh's there).
func (m *Model) sectionFree() []int {
	nl := m.nLinks
	var free []int
	for half := 0; half < 2; half++ {
		for i := 0; i < nl; i++ {
			if m.isShank(i) {
				continue
			}
			free = append(free, half*nl+i)
		}
	}
	return free
}

// isShank reports whether link k is a shank. Positions in z of shanks are
// shanks too (linkOfReduced swaps shanks with shanks).
func (m *Model) isShank(k int) bool {
	for j := 0; j < m.nKnees; j++ {
		if m.knees[j].shank == k {
			return true
		}
	}
	return false
}

// expandSection fills z from the free coordinates u (positions free): each
// shank entry takes its thigh's value.
func (m *Model) expandSection(u []float64, free []int, z []float64) {
	for i, p := range free {
		z[p] = u[i]
	}
	nl := m.nLinks
	for j := 0; j < m.nKnees; j++ {
		kn := &m.knees[j]
		// Stance 0 positions: the shank of leg i sits at link position;
		// with the legs of the same kind (the only walkers with a
		// period-one gait) position and link coincide for stance 0, and
		// swapping both legs keeps the thigh-shank pairing.
		z[kn.shank] = z[kn.thigh] + kn.stop
		z[nl+kn.shank] = z[nl+kn.thigh]
	}
}

// onSection checks that s (just after a heel strike) is on a kneed
// walker's section as FromReduced builds it: every knee locked and
// straight, the stance knee latched if it has a latch, the trailing knee's
// latch released.
func (m *Model) onSection(s *State) error {
	for j := 0; j < m.nKnees; j++ {
		kn := &m.knees[j]
		i := kn.thigh
		bend := s.Q[2+kn.shank] - s.Q[2+kn.thigh] - kn.stop
		if !s.KneeLocked[i] || math.Abs(bend) > 1e-9 {
			return fmt.Errorf("plant: the %s knee is not locked straight just after the heel strike (bend %g rad, locked %v): "+
				"a passive kneed gait needs the swing knee to strike its stop before the heel strikes and the stance knee to stay locked",
				legName(i), bend, s.KneeLocked[i])
		}
		if want := i == s.Stance && m.p.Legs[i].Shank.Latch; s.KneeLatched[i] != want {
			return fmt.Errorf("plant: internal: the %s knee's latch is %v just after the heel strike, the section has it %v", legName(i), s.KneeLatched[i], want)
		}
	}
	return nil
}

// sectionMap evaluates the map in free coordinates: out = P(u) restricted
// to the free positions, from the section state with hip at x and the
// given stance. It returns the step's result.
func (m *Model) sectionMap(u []float64, free []int, stance int, x float64, policy Policy, o GaitOptions, out []float64) (StepResult, error) {
	z := make([]float64, 2*m.nLinks)
	m.expandSection(u, free, z)
	s, err := m.FromReduced(z, stance, x)
	if err != nil {
		return StepResult{}, err
	}
	res, err := m.stepMap(s, policy, o, nil)
	if err != nil {
		return res, err
	}
	if err := m.onSection(&res.After); err != nil {
		return res, err
	}
	m.reduced(&res.After, z)
	for i, p := range free {
		out[i] = z[p]
	}
	return res, nil
}

// kneedMapJacobian is MapJacobian for a walker with knees: central
// differences of the map in the free section coordinates with relative
// step h (see the comment at the top of this file).
func (m *Model) kneedMapJacobian(s State, policy Policy, o GaitOptions, h float64) (*mat.Dense, error) {
	free := m.sectionFree()
	z := m.Reduced(&s)
	u := make([]float64, len(free))
	for i, p := range free {
		u[i] = z[p]
	}
	J := mat.NewDense(len(free), len(free), nil)
	if j, err := centralDiff(J, u, h, func(uin, out []float64) error {
		_, err := m.sectionMap(uin, free, s.Stance, s.Q[0], policy, o, out)
		return err
	}); err != nil {
		return nil, fmt.Errorf("plant: map Jacobian: cannot perturb section coordinate %d: %w", j, err)
	}
	return J, nil
}

// groundImpulseRatio returns |Λ_t|/Λ_n of the ground's impulse on the
// stance foot between the states just before (a) and just after (b) an
// impulse at the same configuration whose only external impulse is the
// ground's on that foot (a knee strike: the knee and hip impulses are
// internal). By the impulse–momentum theorem Λ is the jump of the
// walker's linear momentum, which is the hip rows of M(q) q̇ (the momentum
// conjugate to the hip's position); t and n are the contact's tangent and
// normal in g. +Inf if the normal impulse is not positive.
func (m *Model) groundImpulseRatio(a, b *State, g *footGeom) float64 {
	var M [MaxDOF][MaxDOF]float64
	m.MassMatrix(&b.Q, &M)
	var lam [2]float64
	for r := 0; r < 2; r++ {
		for k := 0; k < m.n; k++ {
			lam[r] += M[r][k] * (b.V[k] - a.V[k])
		}
	}
	lt := lam[0]*g.sp.t[0] + lam[1]*g.sp.t[1]
	ln := lam[0]*g.sp.n[0] + lam[1]*g.sp.n[1]
	if !(ln > 0) {
		return math.Inf(1)
	}
	return math.Abs(lt) / ln
}

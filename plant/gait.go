package plant

import (
	"errors"
	"fmt"
	"math"
	"math/cmplx"
	"sort"

	"gonum.org/v1/gonum/mat"
)

// GaitOptions tune the step-to-step map and the gait finder. The zero value
// gives the defaults noted on each field.
type GaitOptions struct {
	Tol       float64 // relative and absolute tolerance of the adaptive integrator; 0 means 1e-11
	NewtonTol float64 // fixed-point residual max|P(z) − z|; 0 means 1e-10
	MaxIter   int     // Newton iterations; 0 means 30
	MaxTime   float64 // longest step, s; 0 means 20 √(L/g)
	// FDStep is the relative step of the central differences used for the
	// Newton Jacobian; 0 means 1e-6.
	FDStep float64
}

func (o GaitOptions) withDefaults(m *Model) GaitOptions {
	if o.Tol == 0 {
		o.Tol = 1e-11
	}
	if o.NewtonTol == 0 {
		o.NewtonTol = 1e-10
	}
	if o.MaxIter == 0 {
		o.MaxIter = 30
	}
	if o.MaxTime == 0 {
		o.MaxTime = 20 * math.Sqrt(m.reach/m.p.Gravity)
	}
	if o.FDStep == 0 {
		o.FDStep = 1e-6
	}
	return o
}

func (o GaitOptions) validate() error {
	switch {
	case !finite(o.Tol) || o.Tol < 0 || o.Tol > 1e-3:
		return perr("GaitOptions.Tol", o.Tol, "must be between 0 (default 1e-11) and 1e-3")
	case !finite(o.NewtonTol) || o.NewtonTol < 0:
		return perr("GaitOptions.NewtonTol", o.NewtonTol, "must be finite and ≥ 0")
	case o.MaxIter < 0:
		return perr("GaitOptions.MaxIter", float64(o.MaxIter), "must be ≥ 0")
	case !finite(o.MaxTime) || o.MaxTime < 0:
		return perr("GaitOptions.MaxTime", o.MaxTime, "must be finite and ≥ 0")
	case !finite(o.FDStep) || o.FDStep < 0 || o.FDStep > 0.1:
		return perr("GaitOptions.FDStep", o.FDStep, "must be between 0 (default 1e-6) and 0.1")
	}
	return nil
}

// StepResult is one evaluation of the step-to-step map.
type StepResult struct {
	After        State   // just after the next heel strike (the new stance foot rolling)
	Period       float64 // s
	StepLength   float64 // m, stance contact point to the next one along the terrain
	Speed        float64 // m/s, StepLength / Period
	EnergyLost   float64 // J, kinetic energy lost at the heel strike
	ImpulseRatio float64 // |Λ_t|/Λ_n of the heel-strike impulse
	// PeakRequiredFriction is max |F_t|/N of the feet in contact, sampled
	// at every accepted integration step and at the events.
	PeakRequiredFriction float64
	MinNormal            float64 // N, minimum normal force of the feet in contact
	// KneeStrikeEnergyLost is the kinetic energy lost at the step's knee
	// strikes, J (0 without knees); EnergyLost is the heel strike's alone.
	KneeStrikeEnergyLost float64
	// MinStanceKneeTorque is the least lock torque of a locked knee whose
	// foot is on the ground, N·m, sampled like PeakRequiredFriction: the
	// torque the stance knee's stop or latch must carry (negative: a knee
	// held by its stop alone would buckle, a latch must pull). 0 for a
	// walker without knees or a step without a locked stance knee.
	MinStanceKneeTorque float64
	// KneeStrikeImpulseRatio is |Λ_t|/Λ_n of the ground's impulse on the
	// stance foot at the knee strike (the largest if the step has
	// several; 0 without one): the friction the knee strike needs, as
	// ImpulseRatio is the heel strike's. It comes from the impulse–momentum
	// theorem — the ground is the only external impulse, so Λ is the jump
	// of the walker's linear momentum, the hip rows of M(q) Δq̇ — and not
	// from the impulse solve, which checks the same cone in the tick
	// (ImpactSlip).
	KneeStrikeImpulseRatio float64
	Events                 []Event // every event of the step, in order
}

// ErrNoHeelStrike is wrapped by StepMap errors when the walker does not
// reach a heel strike (it falls, lifts off, or the time runs out).
var ErrNoHeelStrike = errors.New("plant: no heel strike")

// StepMap integrates s with the adaptive DOP853 integrator
// (with the policy's input, nil = passive) until just after the next heel
// strike: the step-to-step (Poincaré) map of the gait.
func (m *Model) StepMap(s State, policy Policy, o GaitOptions) (StepResult, error) {
	if err := o.validate(); err != nil {
		return StepResult{}, err
	}
	return m.stepMap(s, policy, o.withDefaults(m), nil)
}

func (m *Model) stepMap(s State, policy Policy, o GaitOptions, observe func(*State, *eval)) (StepResult, error) {
	var res StepResult
	if !finitePhase(&phase{q: s.Q, v: s.V}, m.n) {
		return res, fmt.Errorf("%w: the start state is not finite", ErrNoHeelStrike)
	}
	m.sanitize(&s)
	start := s
	kneeSeen := false
	minKnee := 0.0
	var prev State
	sampled := false
	kneeRatio := 0.0
	var st stepStats
	// Per sample: the knees' figures and the caller's observer. A walker
	// without knees and a caller without an observer need none, and then
	// the map allocates nothing per sample.
	if m.nKnees > 0 || observe != nil {
		st.onSample = func(s *State, ev *eval) {
			// A knee strike shows as two samples at the same instant, the
			// swing knee free in the first and locked in the second.
			if sampled && prev.T == s.T && s.Mode[s.Stance] != Free {
				for i := 0; i < m.nFeet; i++ {
					if m.kneeOf[i] >= 0 && !prev.KneeLocked[i] && s.KneeLocked[i] {
						kneeRatio = math.Max(kneeRatio, m.groundImpulseRatio(&prev, s, &ev.geom[s.Stance]))
					}
				}
			}
			prev, sampled = *s, true
			// A swing knee held by its stop alone whose stop would have to pull
			// is released at this very instant (at the section just after a
			// heel strike, the trailing knee): the sample before its release
			// is not a state the walker is in, and the stance knee's torque
			// jumps when the swing knee goes free, so it is left out.
			pending := false
			for i := 0; i < m.nFeet; i++ {
				if m.kneeOf[i] >= 0 && s.KneeLocked[i] && !s.KneeLatched[i] && s.Mode[i] == Free && ev.knee[i] < 0 {
					pending = true
				}
			}
			for i := 0; i < m.nFeet && !pending; i++ {
				if m.kneeOf[i] >= 0 && s.KneeLocked[i] && s.Mode[i] != Free && (!kneeSeen || ev.knee[i] < minKnee) {
					kneeSeen, minKnee = true, ev.knee[i]
				}
			}
			if observe != nil {
				observe(s, ev)
			}
		}
	}
	why := m.adaptive(&s, policy, s.T+o.MaxTime, o.Tol, o.Tol, true, &res.Events, &st)
	switch why {
	case stopTime:
		return res, fmt.Errorf("%w within %g s", ErrNoHeelStrike, o.MaxTime)
	case stopFail:
		return res, fmt.Errorf("%w: the integration failed at t = %g s (non-finite state or step size underflow)", ErrNoHeelStrike, s.T)
	case stopEvent:
		e := stoppingEvent(res.Events)
		return res, fmt.Errorf("%w: %s at t = %.6f s (foot %d, value %g)", ErrNoHeelStrike, e.Kind, e.T, e.Foot, e.Value)
	}
	heel := res.Events[len(res.Events)-1]
	res.After = s
	res.Period = s.T - start.T
	var g0, g1 footGeom
	m.footGeometry(&start.Q, &start.V, start.Stance, start.Seg[start.Stance], &g0)
	m.footGeometry(&s.Q, &s.V, s.Stance, s.Seg[s.Stance], &g1)
	res.StepLength = g0.sp.t[0]*(g1.sp.p[0]-g0.sp.p[0]) + g0.sp.t[1]*(g1.sp.p[1]-g0.sp.p[1])
	res.Speed = res.StepLength / res.Period
	res.EnergyLost = heel.EnergyLost
	res.ImpulseRatio = heel.Value
	res.PeakRequiredFriction = st.peakFriction
	res.MinNormal = st.minNormal
	res.MinStanceKneeTorque = minKnee
	res.KneeStrikeImpulseRatio = kneeRatio
	for _, e := range res.Events {
		if e.Kind == KneeStrike {
			res.KneeStrikeEnergyLost += e.EnergyLost
		}
	}
	return res, nil
}

// stoppingEvent picks the event that stopped an analysis run from its
// events: the last one other than an impact record. An impact that slips
// adds its ImpactSlip first and its HeelStrike or Touchdown record last,
// and the slip is what stopped the run.
func stoppingEvent(events []Event) Event {
	for i := len(events) - 1; i >= 0; i-- {
		if k := events[i].Kind; k != HeelStrike && k != Touchdown {
			return events[i]
		}
	}
	if len(events) == 0 {
		return Event{Foot: -1, Segment: -1}
	}
	return events[len(events)-1]
}

// Reduced returns the map coordinates of a state: the link angles and
// rates with the legs ordered stance first, z = (θ_stance, θ_swing[,
// θ_torso], θ̇_stance, θ̇_swing[, θ̇_torso]); a kneed walker's θ_stance and
// θ_swing are its thighs' and its shanks follow, stance first, z =
// (θ_stance, θ_swing[, θ_torso], θ_stance shank, θ_swing shank, rates in
// the same order). The hip position and velocity
// follow from the stance foot rolling, so z describes the state on the
// map's section up to the walker's position along the terrain. Like Step,
// it repairs the bookkeeping fields of a hand-made state (on a copy; s is
// not changed), so a stance index that is not a foot counts as 0.
func (m *Model) Reduced(s *State) []float64 {
	c := *s
	m.sanitize(&c)
	z := make([]float64, 2*m.nLinks)
	m.reduced(&c, z)
	return z
}

func (m *Model) reduced(s *State, z []float64) {
	nl := m.nLinks
	for i := 0; i < nl; i++ {
		k := m.linkOfReduced(s.Stance, i)
		z[i] = s.Q[2+k]
		z[nl+i] = s.V[2+k]
	}
}

// linkOfReduced maps position i of z to a link index for a given stance:
// positions follow the link order of q with the legs' links (thigh, and
// shank when both legs have one) taken stance leg first.
func (m *Model) linkOfReduced(stance, i int) int {
	if m.nFeet != 2 || stance == 0 {
		return i
	}
	switch {
	case i < 2:
		return 1 - i
	case m.kneeOf[0] >= 0 && m.kneeOf[1] >= 0 && i == m.feet[0].link:
		return m.feet[1].link
	case m.kneeOf[0] >= 0 && m.kneeOf[1] >= 0 && i == m.feet[1].link:
		return m.feet[0].link
	}
	return i
}

// FromReduced builds the state with map coordinates z, the given stance
// foot rolling, and its hip at horizontal position x (see Reduced). A
// kneed walker's section has every knee locked straight (see FindGait):
// its shank entries of z must equal their thigh's (to 1e-9), and the
// knees are locked, the stance knee latched if it has a latch and the
// swing knee held by its stop, as just after a heel strike.
func (m *Model) FromReduced(z []float64, stance int, x float64) (State, error) {
	if len(z) != 2*m.nLinks {
		return State{}, fmt.Errorf("%w: %d map coordinates, want %d", ErrStand, len(z), 2*m.nLinks)
	}
	if err := m.checkStance(stance); err != nil {
		return State{}, err
	}
	nl := m.nLinks
	var ang [2]float64
	var rates [MaxLinks]float64
	torso := 0.0
	for i := 0; i < nl; i++ {
		k := m.linkOfReduced(stance, i)
		if k < m.nFeet {
			ang[k] = z[i]
		} else if k == m.torso {
			torso = z[i]
		}
		rates[k] = z[nl+i]
	}
	for j := 0; j < m.nKnees; j++ {
		kn := &m.knees[j]
		sh := m.reducedPos(stance, kn.shank)
		th := m.reducedPos(stance, kn.thigh)
		if d, w := z[sh]-z[th]-kn.stop, z[nl+sh]-z[nl+th]; !(math.Abs(d) <= 1e-9 && math.Abs(w) <= 1e-9*math.Max(1, math.Abs(z[nl+th]))) {
			return State{}, fmt.Errorf("%w: map coordinates with the %s knee bent by %g rad at %g rad/s; on the map's section every knee is locked straight",
				ErrStand, legName(kn.thigh), d, w)
		}
		rates[kn.shank] = rates[kn.thigh]
	}
	mm := *m
	mm.o.IgnoreScuff = true // off the section the swing foot may be below ground
	return mm.Stand(stance, x, ang, torso, rates[:nl]...)
}

// reducedPos is the position in z of link k for a given stance (the
// inverse of linkOfReduced, which is its own inverse).
func (m *Model) reducedPos(stance, k int) int { return m.linkOfReduced(stance, k) }

// legName is "left" or "right".
func legName(i int) string {
	if i == 0 {
		return "left"
	}
	return "right"
}

// Gait is a period-one gait found by FindGait.
type Gait struct {
	Found  bool  // Newton converged to NewtonTol
	Stable bool  // every eigenvalue of the map Jacobian inside the unit circle
	State  State // just after heel strike, State.Stance the new stance foot
	// Reduced is the fixed point in map coordinates (see Model.Reduced):
	// stance-leg angle and swing-leg angle, [torso angle,] [stance and
	// swing shank angles,] then their rates, absolute angles from the
	// world vertical. A kneed walker's shank entries equal their thigh's
	// (its knees are locked straight on the section; State has the lock
	// and latch flags).
	Reduced []float64
	// Eigenvalues of the map Jacobian, largest magnitude first. Without
	// knees they come from the variational equations with the event-time
	// (saltation) correction; with knees from central differences of the
	// whole map (kneedgait.go says why), in the free coordinates of the
	// section: Reduced without the shank entries, whose directions add
	// only zero eigenvalues.
	Eigenvalues []complex128
	Jacobian    *mat.Dense // ∂P/∂z at the fixed point (free coordinates with knees)
	Residual    float64    // max |P(z) − z| over the free coordinates
	Iterations  int        // Newton updates made (0 when the guess already met the tolerance)
	StepResult             // period, step length, speed, energy, friction, impulse of the gait's step
}

// FindGait looks for a period-one gait (a fixed point of the step-to-step
// map) near guess by Newton's method on P(z) − z with a central-difference
// Jacobian (gonum for the linear solves), then computes the eigenvalues of
// the map (MapJacobian). A kneed walker's map passes through the swing
// knee's unlock and knee strike; its section has both knees locked
// straight (kneedgait.go), and a step that reaches the heel strike with
// the swing knee still bent is an error. guess should be a state just
// after heel strike (its stance foot rolling). An error explains a failure;
// a Gait with Found false is returned with the last iterate when Newton did
// not converge.
func FindGait(m *Model, policy Policy, guess State, o GaitOptions) (Gait, error) {
	if m == nil {
		return Gait{}, errors.New("plant: FindGait needs a model")
	}
	if err := o.validate(); err != nil {
		return Gait{}, err
	}
	o = o.withDefaults(m)
	stance, x := guess.Stance, guess.Q[0]
	free := m.sectionFree()
	dim := len(free)
	zg := m.Reduced(&guess)
	z := make([]float64, dim)
	for i, p := range free {
		z[i] = zg[p]
	}
	mapZ := func(u []float64, out []float64) (StepResult, error) {
		return m.sectionMap(u, free, stance, x, policy, o, out)
	}
	var g Gait
	pz := make([]float64, dim)
	fz := make([]float64, dim)
	J := mat.NewDense(dim, dim, nil)
	for it := 0; ; it++ {
		res, err := mapZ(z, pz)
		if err != nil {
			return g, fmt.Errorf("plant: gait finder, iteration %d: %w", it, err)
		}
		g.Iterations = it
		g.Residual = 0
		for i := range z {
			fz[i] = pz[i] - z[i]
			g.Residual = math.Max(g.Residual, math.Abs(fz[i]))
		}
		g.StepResult = res
		g.Reduced = make([]float64, 2*m.nLinks)
		m.expandSection(z, free, g.Reduced)
		if g.Residual <= o.NewtonTol {
			g.Found = true
			break
		}
		if it >= o.MaxIter {
			break
		}
		// The Newton matrix is ∂(P(z) − z)/∂z = ∂P/∂z − I.
		if j, err := centralDiff(J, z, o.FDStep, func(zin, out []float64) error {
			_, err := mapZ(zin, out)
			return err
		}); err != nil {
			return g, fmt.Errorf("plant: gait finder, Jacobian column %d: %w", j, err)
		}
		for j := 0; j < dim; j++ {
			J.Set(j, j, J.At(j, j)-1)
		}
		var dz mat.VecDense
		if err := dz.SolveVec(J, mat.NewVecDense(dim, fz)); err != nil {
			return g, fmt.Errorf("plant: gait finder, iteration %d: singular Newton system: %w", it, err)
		}
		// Damp steps that would leave the region where the linear model holds.
		step := 0.0
		for i := 0; i < dim; i++ {
			step = math.Max(step, math.Abs(dz.AtVec(i)))
		}
		scale := 1.0
		if step > 0.1 {
			scale = 0.1 / step
		}
		for i := 0; i < dim; i++ {
			z[i] -= scale * dz.AtVec(i)
		}
	}
	s, err := m.FromReduced(g.Reduced, stance, x)
	if err != nil {
		return g, err
	}
	g.State = s
	jac, err := m.MapJacobian(s, policy, o)
	if err != nil {
		return g, fmt.Errorf("plant: gait eigenvalues: %w", err)
	}
	g.Jacobian = jac
	g.Eigenvalues = eigenvalues(jac)
	g.Stable = len(g.Eigenvalues) > 0 && cmplx.Abs(g.Eigenvalues[0]) < 1
	return g, nil
}

// eigenvalues returns the eigenvalues of a square matrix, largest
// magnitude first.
func eigenvalues(a *mat.Dense) []complex128 {
	var e mat.Eigen
	if !e.Factorize(a, mat.EigenNone) {
		return nil
	}
	v := e.Values(nil)
	sort.Slice(v, func(i, j int) bool {
		ai, aj := cmplx.Abs(v[i]), cmplx.Abs(v[j])
		if ai != aj {
			return ai > aj
		}
		return imag(v[i]) > imag(v[j])
	})
	return v
}

package plant

import (
	"errors"
	"fmt"
	"math"
)

// State is the full dynamic state of a walker. Copy it by value to keep a
// snapshot; a copy continues exactly like the original.
type State struct {
	T      float64         // simulated time, s
	Q, V   [MaxDOF]float64 // q = (x_hip, y_hip, θ_left, θ_right[, θ_torso][, θ_shank…]) and q̇
	Mode   [2]ContactMode  // per foot
	Stance int             // the foot that carries the walker (0 left, 1 right)
	// SlipDir is the sign of the slip velocity of a sliding foot (±1).
	SlipDir [2]float64
	// Anchor is t·c + R·θ of a rolling foot at the time it started rolling
	// (c its arc centre): rolling keeps it constant, so the position
	// projection removes tangential drift against it.
	Anchor [2]float64
	// Seg is the terrain segment each foot was last nearest to (search hint
	// and the segment of Anchor).
	Seg [2]int
	// KneeLocked holds leg i's knee at its stop (θ_shank − θ_thigh =
	// Shank.StopAngle, 0: the shank in line with the thigh) by a joint
	// constraint solved with the
	// contacts; its torque is in FootContact.KneeTorque. An unlocked knee
	// swings freely. Ignored for a straight leg.
	KneeLocked [2]bool
	// KneeLatched marks a locked knee whose latch (Shank.Latch) is engaged:
	// it carries torque of either sign and does not unlock until the latch
	// releases, when the leg's foot leaves the ground.
	KneeLatched [2]bool
	// fired marks alarm conditions that have fired and not yet cleared, so
	// a persisting condition raises its event once.
	fired uint32
	// vertex marks a foot whose contact is the vertex at the end of
	// segment Seg (rather than the inside of Seg).
	vertex [2]bool
	// belt is the belt motion of the tick being stepped (set from the
	// Input at the start of Step, Contacts and Accel): the speed at beltT0
	// and the acceleration held over the tick. The events and the
	// projection need the belt speed at times inside the tick.
	belt   BeltMotion
	beltT0 float64
}

// Input is what the controller applies over one tick (zero-order hold).
type Input struct {
	Torque   [MaxActuators]float64 // N·m, in JointNames order
	HipForce [2]float64            // external push on the hip (x, y), N
	// Belt is the motion of the terrain's belt segment over the tick (the
	// rig's, not the controller's); ignored without a belt segment.
	Belt BeltMotion
}

// BeltMotion is the belt's motion over one tick: its speed at the start of
// the tick and a constant acceleration, so the speed is exact at both ends
// of a tick of a piecewise-linear profile (BeltProfile.Motion builds it).
// Speed is positive when the surface runs backward (toward −t̂, as a
// treadmill runs under a walker facing forward).
type BeltMotion struct {
	Speed float64 // m/s at the start of the tick, positive backward
	Accel float64 // m/s², d(Speed)/dt over the tick
}

// ReleaseKneeLatch releases the latch of leg i's knee, as a controller
// that drives the knee does before push-off, and reports whether a latch
// was engaged. The knee stays locked at its stop: from the next Step it is
// held by the one-sided stop alone and unlocks (a KneeUnlock event, never
// KneeBuckle, since the knee has a latch) when the stop would have to pull,
// in the first instant of that Step if it must pull already. The latch
// engages again at the knee's next knee strike, or at its leg's heel strike
// with the knee at its stop. A leg without a knee, a knee without a latch
// (Shank.Latch) and a latch not engaged are left as they are (false); so is
// an i other than 0 or 1. Call it between ticks; it touches nothing but s.
func (m *Model) ReleaseKneeLatch(s *State, i int) bool {
	if i < 0 || i > 1 || m.kneeOf[i] < 0 || !m.p.Legs[i].Shank.Latch || !s.KneeLatched[i] {
		return false
	}
	s.KneeLatched[i] = false
	return true
}

// HasKnee reports whether leg i is a thigh and a shank joined by a knee.
func (m *Model) HasKnee(i int) bool { return i >= 0 && i <= 1 && m.kneeOf[i] >= 0 }

// KneeHasLatch reports whether leg i has a knee with a latch, the knees
// ReleaseKneeLatch acts on.
func (m *Model) KneeHasLatch(i int) bool {
	return i >= 0 && i <= 1 && m.kneeOf[i] >= 0 && m.p.Legs[i].Shank.Latch
}

// KneeActuated reports whether leg i has a knee with a torque actuator
// (Shank.Actuated, a joint knee_left or knee_right).
func (m *Model) KneeActuated(i int) bool {
	return i >= 0 && i <= 1 && m.kneeOf[i] >= 0 && m.knees[m.kneeOf[i]].actuated
}

// ErrStand is wrapped by the errors Stand returns when it cannot place the
// walker.
var ErrStand = errors.New("plant: cannot stand the walker")

// Stand builds a consistent state: the given leg angles (and torso angle,
// ignored without a torso), the hip at horizontal position x, and the hip
// height chosen so that the stance foot touches the terrain and rolls. rates
// are the link angular rates in link order (left, right[, torso][, shanks]);
// missing ones are zero, except a shank's, which is its thigh's. A kneed
// leg stands straight (shank angle = thigh angle) with its knee locked. The hip velocity follows from the rolling constraint. The
// other foot is free; Stand fails if it would be below the ground by more
// than 1 µm, unless Options.IgnoreScuff is set.
func (m *Model) Stand(stance int, x float64, legAngles [2]float64, torsoAngle float64, rates ...float64) (State, error) {
	var s State
	if err := m.checkStance(stance); err != nil {
		return s, err
	}
	if len(rates) > m.nLinks {
		return s, fmt.Errorf("%w: %d rates given, the model has %d links", ErrStand, len(rates), m.nLinks)
	}
	for i, r := range rates {
		if !finite(r) {
			return s, fmt.Errorf("%w: rate %d is %g, must be finite", ErrStand, i, r)
		}
	}
	for _, v := range [...]struct {
		name  string
		value float64
	}{{"hip position x", x}, {"left leg angle", legAngles[0]}, {"right leg angle", legAngles[1]}, {"torso angle", torsoAngle}} {
		if !finite(v.value) {
			return s, fmt.Errorf("%w: %s is %g, must be finite", ErrStand, v.name, v.value)
		}
	}
	s.Stance = stance
	s.Q[0] = x
	for i := 0; i < m.nFeet; i++ {
		s.Q[2+i] = legAngles[i]
	}
	if m.torso >= 0 {
		s.Q[2+m.torso] = torsoAngle
	}
	for i, r := range rates {
		s.V[2+i] = r
	}
	// A kneed leg stands straight with its knee locked at the stop; a shank
	// rate not given is the thigh's, so the knee starts at rest.
	for j := 0; j < m.nKnees; j++ {
		kn := &m.knees[j]
		s.Q[2+kn.shank] = s.Q[2+kn.thigh] + kn.stop
		if kn.shank >= len(rates) {
			s.V[2+kn.shank] = s.V[2+kn.thigh]
		}
		s.KneeLocked[kn.thigh] = true
		s.KneeLatched[kn.thigh] = m.p.Legs[kn.thigh].Shank.Latch && kn.thigh == stance
	}
	// Hip height: start with the hip above the terrain under it and adjust
	// until the stance foot's gap is zero.
	s.Q[1] = m.p.Terrain.Start[1] + 2*m.reach
	hint := m.segmentAtX(x)
	s.Seg = [2]int{hint, hint}
	var g footGeom
	for it := 0; it < 50; it++ {
		m.footGeometry(&s.Q, &s.V, stance, s.Seg[stance], &g)
		s.Seg[stance] = g.sp.seg
		if math.Abs(g.gap) < 1e-13 {
			break
		}
		ny := g.sp.n[1]
		if ny < 0.1 {
			ny = 0.1
		}
		s.Q[1] -= g.gap / ny
	}
	if math.Abs(g.gap) > 1e-9 {
		return s, fmt.Errorf("%w: the stance foot does not reach the terrain (gap %g m)", ErrStand, g.gap)
	}
	s.Mode[stance] = Rolling
	m.setAnchor(&s, stance, &g)
	// Hip velocity from J v = 0 on the stance foot: t and n are
	// orthonormal, so v_hip = −t (J_t,θ θ̇) − n (J_n,θ θ̇).
	m.footGeometry(&s.Q, &s.V, stance, s.Seg[stance], &g)
	k := 2 + stance
	wt := g.jt[k] * s.V[k]
	wn := g.jn[k] * s.V[k]
	if fl := 2 + m.feet[stance].link; fl != k {
		wt += g.jt[fl] * s.V[fl]
		wn += g.jn[fl] * s.V[fl]
	}
	s.V[0] = -g.sp.t[0]*wt - g.sp.n[0]*wn
	s.V[1] = -g.sp.t[1]*wt - g.sp.n[1]*wn
	if m.nFeet == 2 {
		o := 1 - stance
		m.footGeometry(&s.Q, &s.V, o, s.Seg[stance], &g)
		s.Seg[o] = g.sp.seg
		if g.gap < -1e-6 && !m.o.IgnoreScuff {
			return s, fmt.Errorf("%w: the swing foot would be %g m below the ground", ErrStand, -g.gap)
		}
	}
	return s, nil
}

// checkStance refuses a stance index that is not one of the model's feet.
func (m *Model) checkStance(stance int) error {
	if stance < 0 || stance >= m.nFeet {
		return fmt.Errorf("%w: stance foot %d: must be 0 (left) or 1 (right) and the model has %d feet", ErrStand, stance, m.nFeet)
	}
	return nil
}

// segmentAtX returns the terrain segment whose horizontal extent holds x.
func (m *Model) segmentAtX(x float64) int {
	for i := range m.terrain {
		if x < m.terrain[i].p1[0] {
			return i
		}
	}
	return len(m.terrain) - 1
}

// setAnchor records the rolling reference of foot i from its geometry, and
// its terrain region.
func (m *Model) setAnchor(s *State, i int, g *footGeom) {
	c, _, _ := m.footCentre(&s.Q, i)
	s.Anchor[i] = g.sp.t[0]*c[0] + g.sp.t[1]*c[1] + m.feet[i].radius*s.Q[2+m.feet[i].link]
	s.Seg[i], s.vertex[i] = m.regionOf(g)
}

// JointState writes the joint angles and rates an encoder would read, in
// JointNames order: a hip angle is the leg's angle less the other leg's
// (compass) or the torso's; a knee angle is θ_shank − θ_thigh (zero
// straight, negative flexed). It writes as many entries as the slices hold.
func (m *Model) JointState(s *State, angle, rate []float64) {
	j := 0
	for ; j < m.nHip; j++ {
		var a, r float64
		if m.nHip == 1 {
			a, r = s.Q[3]-s.Q[2], s.V[3]-s.V[2]
		} else {
			t := 2 + m.torso
			a, r = s.Q[2+j]-s.Q[t], s.V[2+j]-s.V[t]
		}
		putJoint(angle, rate, j, a, r)
	}
	for k := 0; k < m.nKnees; k++ {
		kn := &m.knees[k]
		if kn.actuated {
			putJoint(angle, rate, j, s.Q[2+kn.shank]-s.Q[2+kn.thigh], s.V[2+kn.shank]-s.V[2+kn.thigh])
			j++
		}
	}
}

// putJoint stores joint j's angle and rate where the slices have room.
func putJoint(angle, rate []float64, j int, a, r float64) {
	if j < len(angle) {
		angle[j] = a
	}
	if j < len(rate) {
		rate[j] = r
	}
}

// IMU returns the absolute pitch angle and rate of the link carrying the
// IMU: the torso, or the left leg of a compass walker.
func (m *Model) IMU(s *State) (pitch, rate float64) {
	k := 2
	if m.torso >= 0 {
		k = 2 + m.torso
	}
	return s.Q[k], s.V[k]
}

// Energy returns the kinetic energy ½ q̇ᵀ M q̇ and the gravitational potential
// energy Σ m g y (zero at y = 0).
func (m *Model) Energy(s *State) (kinetic, potential float64) {
	var M [MaxDOF][MaxDOF]float64
	m.MassMatrix(&s.Q, &M)
	for i := 0; i < m.n; i++ {
		for j := 0; j < m.n; j++ {
			kinetic += 0.5 * s.V[i] * M[i][j] * s.V[j]
		}
	}
	g := m.p.Gravity
	potential = m.massTotal * g * s.Q[1]
	for i := 0; i < m.nLinks; i++ {
		a, _ := axis(s.Q[2+i])
		potential += m.links[i].mass * g * m.links[i].rho * a[1]
	}
	for k := 0; k < m.nKnees; k++ {
		// The shank hangs from the knee, ℓ a(θ_thigh) below the hip.
		kn := &m.knees[k]
		a, _ := axis(s.Q[2+kn.thigh])
		potential += m.links[kn.shank].mass * g * m.feet[kn.thigh].thigh * a[1]
	}
	return
}

// Pose holds the points of a stick figure of the walker.
type Pose struct {
	Hip       [2]float64    // hip joint, m
	Knee      [2][2]float64 // knee joint of a kneed leg; the middle of a straight leg's axis
	Foot      [2][2]float64 // end of each leg axis: knee + L_shank·a(θ_shank), or hip + L·a(θ)
	ArcCentre [2][2]float64 // centre of each foot arc
	TorsoTop  [2]float64    // hip + 2·COMDist along the torso axis (hip if none)
	COM       [2]float64    // centre of mass of the whole walker
}

// Points returns the stick-figure points of the state.
func (m *Model) Points(s *State) Pose {
	var p Pose
	p.Hip = [2]float64{s.Q[0], s.Q[1]}
	p.TorsoTop = p.Hip
	p.COM = [2]float64{m.p.HipMass * s.Q[0], m.p.HipMass * s.Q[1]}
	var joint [MaxLinks][2]float64 // proximal joint of each link
	for i := 0; i < m.nLinks; i++ {
		joint[i] = p.Hip
	}
	for i := 0; i < m.nFeet; i++ {
		f := &m.feet[i]
		a, _ := axis(s.Q[2+i])
		if f.link != i {
			p.Knee[i] = [2]float64{s.Q[0] + f.thigh*a[0], s.Q[1] + f.thigh*a[1]}
			joint[f.link] = p.Knee[i]
			a, _ = axis(s.Q[2+f.link])
			p.Foot[i] = [2]float64{p.Knee[i][0] + f.length*a[0], p.Knee[i][1] + f.length*a[1]}
		} else {
			L := f.length
			p.Foot[i] = [2]float64{s.Q[0] + L*a[0], s.Q[1] + L*a[1]}
			p.Knee[i] = [2]float64{s.Q[0] + 0.5*L*a[0], s.Q[1] + 0.5*L*a[1]}
		}
		p.ArcCentre[i], _, _ = m.footCentre(&s.Q, i)
	}
	for i := 0; i < m.nLinks; i++ {
		a, _ := axis(s.Q[2+i])
		l := m.links[i]
		p.COM[0] += l.mass * (joint[i][0] + l.rho*a[0])
		p.COM[1] += l.mass * (joint[i][1] + l.rho*a[1])
		if i == m.torso {
			p.TorsoTop = [2]float64{s.Q[0] + 2*l.rho*a[0], s.Q[1] + 2*l.rho*a[1]}
		}
	}
	p.COM[0] /= m.massTotal
	p.COM[1] /= m.massTotal
	return p
}

// Contacts evaluates the contact record of each foot at s with input in
// (nil: none) without advancing it: what Step reports at the end of a tick
// that ends in this state with this input.
func (m *Model) Contacts(s *State, in *Input) [2]FootContact {
	var ev eval
	var out [2]FootContact
	c := *s
	m.sanitize(&c)
	m.setBelt(&c, in)
	m.rhs(&c, &c.Q, &c.V, in, &ev)
	for i := 0; i < m.nFeet; i++ {
		m.contactRecord(&c, &ev, i, &out[i])
	}
	return out
}

// Accel returns q̈ at s with input in (nil: none) and whether the
// constrained dynamics could be solved.
func (m *Model) Accel(s *State, in *Input) ([MaxDOF]float64, bool) {
	var ev eval
	c := *s
	m.sanitize(&c)
	m.setBelt(&c, in)
	m.rhs(&c, &c.Q, &c.V, in, &ev)
	return ev.acc, ev.ok
}

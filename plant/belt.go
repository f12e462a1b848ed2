package plant

import "fmt"

// Moving ground: a treadmill belt.
//
// Derivation. Let segment b of the terrain have the forward unit tangent t̂
// and normal n̂. Its surface moves along itself: a material point of the
// belt has the velocity u(t) t̂ with u = −v_b, where v_b(t) is the belt
// speed, positive when the surface runs backward (a treadmill under a
// walker facing forward). The belt's shape does not change, so the contact
// geometry (gap, closest point, t̂, n̂, the rows J_t and J_n) is that of
// fixed ground; only the kinematic conditions change.
//
//   - Rolling. The material point of the foot at the contact moves with the
//     belt's material point: J_t q̇ = u(t), J_n q̇ = 0 (the issue's
//     J q̇ = v_b t̂ with the sign of v_b made explicit). Differentiating along
//     the motion (t̂ is constant on the segment's line): J_t q̈ + J̇_t q̇ = u̇
//     = −a_b, J_n q̈ + J̇_n q̇ = 0. The tangential row's right-hand side gains
//     −a_b; nothing else in the saddle-point system changes, so the contact
//     force λ = (F_t, N) is still the force of the surface on the foot.
//   - Rolling anchor. Rolling keeps t̂·c + Rθ constant on fixed ground
//     (State.Anchor); on the belt its rate is J_t q̇ = u, so the anchor moves
//     by ∫u dt over every interval the state is advanced (rideBelt), and the
//     position projection keeps the foot on the moving material point.
//   - Sliding. Coulomb friction opposes the slip relative to the surface,
//     s_rel = J_t q̇ − u: SlipDir is the sign of s_rel, the stick condition
//     is SlipDir·s_rel crossing zero, and FootContact.SlipVel reports s_rel.
//   - Heel strike. Plastic and no slip relative to the surface: the impulse
//     solves [M −Jᵀ; J 0][Δq̇; Λ] = [0; g − J q̇⁻] with g = (u, 0) for the
//     foot on the belt, so the foot leaves the impact moving with the belt.
//     Λ is unchanged by a constant boost of all velocities (the system is
//     linear and J applied to a rigid translation u t̂ of the whole walker
//     gives exactly (u, 0)), which is why the friction-cone test of the
//     impulse needs no change. The energy lost is measured relative to the
//     surface: the kinetic energy in a frame moving with it.
//   - Velocity projection. After each tick q̇ is projected onto J q̇ = g
//     instead of J q̇ = 0.
//
// Checks (belt_test.go): Galilean invariance (a belt of constant speed is
// fixed ground seen from a frame moving with it: the motion relative to
// the belt equals the fixed-ground motion and the forces are equal);
// d'Alembert's principle (in the frame of a belt accelerating with
// surface acceleration −a_b t̂, every mass feels the inertial force +m a_b t̂:
// on a level belt the walker sees gravity g' = (a_b, −g), tilted forward by
// atan(a_b/g) and of size √(g² + a_b²), which is the same as fixed ground
// sloping down by atan(a_b/g) under gravity √(g² + a_b²)); and energy
// conservation relative to a constant-speed belt in passive stance.
//
// Timing. The loop gives the belt motion of each tick in Input.Belt: the
// speed at the start of the tick and an acceleration held over it (first-
// order hold of the speed). A piecewise-linear profile is exact at every
// tick boundary; a profile corner inside a tick is smoothed over that tick.
// The belt of a tick only needs the arithmetic above, so a tick on the belt
// costs about as much as one on fixed ground (BenchmarkTickBelt), and a
// tick off the belt takes exactly the arithmetic it took before belts.
//
// Scope. The belt moves where a foot touches the inside of the belt
// segment; its end vertices (the rollers) are fixed ground. The analysis
// tools (StepMap, FindGait, MapJacobian) work in the belt's frame: exact for
// a constant-speed belt by Galilean invariance.

// onBelt reports whether the contact geometry g lies on the moving surface
// of the belt (the inside of the belt segment, not its end vertices).
func (m *Model) onBelt(g *footGeom) bool {
	return m.terrain[g.sp.seg].belt && !g.sp.clamped
}

// surface returns the velocity u of the surface under contact geometry g
// along its forward tangent, tau after s.T, and its rate u̇: both zero off
// the belt.
func (m *Model) surface(s *State, g *footGeom, tau float64) (u, du float64) {
	if !m.onBelt(g) {
		return 0, 0
	}
	return -(s.belt.Speed + s.belt.Accel*(s.T+tau-s.beltT0)), -s.belt.Accel
}

// setBelt takes the belt motion of a tick starting at s.T from the input
// (none: a belt at rest).
func (m *Model) setBelt(s *State, in *Input) {
	s.belt, s.beltT0 = BeltMotion{}, s.T
	if in != nil {
		s.belt = in.Belt
	}
}

// rideBelt moves the rolling anchor of every foot rolling on the belt by
// the surface's displacement ∫u dt over the next h after s.T (before s.T
// advances), so that the position projection holds the foot to the belt's
// material point. Off the belt it does nothing.
func (m *Model) rideBelt(s *State, h float64) {
	if s.belt == (BeltMotion{}) {
		return
	}
	for i := 0; i < m.nFeet; i++ {
		if s.Mode[i] != Rolling || s.vertex[i] || !m.terrain[s.Seg[i]].belt {
			continue
		}
		v0 := s.belt.Speed + s.belt.Accel*(s.T-s.beltT0)
		s.Anchor[i] -= v0*h + 0.5*s.belt.Accel*h*h
	}
}

// kineticOnSurface is the kinetic energy of the walker with velocities v,
// measured in a frame moving with the surface under contact geometry g
// (the world frame off the belt).
func (m *Model) kineticOnSurface(s *State, v *[MaxDOF]float64, g *footGeom) float64 {
	c := *s
	c.V = *v
	if u, _ := m.surface(s, g, 0); u != 0 {
		c.V[0] -= u * g.sp.t[0]
		c.V[1] -= u * g.sp.t[1]
	}
	ke, _ := m.Energy(&c)
	return ke
}

// MoveWithBelt adds the velocity of the belt's surface, running at speed
// (positive backward), to the walker: a rigid translation of every link, so
// the state relative to the belt is unchanged. It is how a state built by
// Stand (at rest relative to fixed ground) is put on a running belt. It
// does nothing without a belt segment.
func (m *Model) MoveWithBelt(s *State, speed float64) {
	for i := range m.terrain {
		if m.terrain[i].belt {
			s.V[0] -= speed * m.terrain[i].t[0]
			s.V[1] -= speed * m.terrain[i].t[1]
			return
		}
	}
}

// BeltSegment returns the index of the terrain's belt segment, or −1.
func (m *Model) BeltSegment() int {
	for i := range m.terrain {
		if m.terrain[i].belt {
			return i
		}
	}
	return -1
}

// BeltPoint is one (time, speed) corner of a belt speed profile.
type BeltPoint struct {
	T     float64 // s
	Speed float64 // m/s, positive backward
}

// BeltPulse is a perturbation of the belt speed as gait labs apply it: the
// speed changes by Delta over Rise, stays there for Hold, and returns over
// Fall. A negative Delta slows the belt.
type BeltPulse struct {
	Start float64 // s, when the speed starts to change
	Delta float64 // m/s, the change of speed
	Rise  float64 // s, > 0: time to reach Delta (acceleration Delta/Rise)
	Hold  float64 // s, ≥ 0: time at the changed speed
	Fall  float64 // s, > 0: time to return to the profile
}

// at is the pulse's contribution to the speed at time t.
func (p *BeltPulse) at(t float64) float64 {
	d := t - p.Start
	switch {
	case d <= 0:
		return 0
	case d < p.Rise:
		return p.Delta * d / p.Rise
	case d <= p.Rise+p.Hold:
		return p.Delta
	case d < p.Rise+p.Hold+p.Fall:
		return p.Delta * (1 - (d-p.Rise-p.Hold)/p.Fall)
	}
	return 0
}

// BeltProfile is a belt speed as a pure function of time: the linear
// interpolation of Points (held constant before the first and after the
// last), plus every pulse. A constant speed is one point, a ramp two.
type BeltProfile struct {
	Points []BeltPoint // in increasing time; empty means a belt at rest
	Pulses []BeltPulse // added to the interpolated speed; empty for none
}

// Speed returns the belt speed at time t, m/s, positive backward.
func (p *BeltProfile) Speed(t float64) float64 {
	v := 0.0
	if n := len(p.Points); n > 0 {
		switch {
		case t <= p.Points[0].T:
			v = p.Points[0].Speed
		case t >= p.Points[n-1].T:
			v = p.Points[n-1].Speed
		default:
			// Few points: a linear search is cheaper than bookkeeping.
			for k := 1; k < n; k++ {
				a, b := p.Points[k-1], p.Points[k]
				if t < b.T {
					v = a.Speed + (b.Speed-a.Speed)*(t-a.T)/(b.T-a.T)
					break
				}
			}
		}
	}
	for k := range p.Pulses {
		v += p.Pulses[k].at(t)
	}
	return v
}

// Motion returns the belt motion of the tick [t, t+dt]: the speed at t and
// the mean acceleration over the tick, so that the plant's belt speed
// matches the profile at both ends of every tick.
func (p *BeltProfile) Motion(t, dt float64) BeltMotion {
	v0 := p.Speed(t)
	return BeltMotion{Speed: v0, Accel: (p.Speed(t+dt) - v0) / dt}
}

// Validate checks the profile: finite values, points in strictly
// increasing time, pulses with positive rise and fall times. Errors name
// the field like ParamError does ("Points[2].T").
func (p *BeltProfile) Validate() error {
	for i, pt := range p.Points {
		f := fmt.Sprintf("Points[%d].", i)
		switch {
		case !finite(pt.T):
			return perr(f+"T", pt.T, "must be finite")
		case !finite(pt.Speed):
			return perr(f+"Speed", pt.Speed, "must be finite")
		case i > 0 && !(pt.T > p.Points[i-1].T):
			return perr(f+"T", pt.T, "must be later than the point before (%g s)", p.Points[i-1].T)
		}
	}
	for i, pu := range p.Pulses {
		f := fmt.Sprintf("Pulses[%d].", i)
		switch {
		case !finite(pu.Start):
			return perr(f+"Start", pu.Start, "must be finite")
		case !finite(pu.Delta):
			return perr(f+"Delta", pu.Delta, "must be finite")
		case !finite(pu.Rise) || pu.Rise <= 0:
			return perr(f+"Rise", pu.Rise, "must be a finite time > 0 s (a step of speed needs infinite force)")
		case !finite(pu.Hold) || pu.Hold < 0:
			return perr(f+"Hold", pu.Hold, "must be a finite time ≥ 0 s")
		case !finite(pu.Fall) || pu.Fall <= 0:
			return perr(f+"Fall", pu.Fall, "must be a finite time > 0 s")
		}
	}
	return nil
}

// BeltEnds returns the rear and front end points of the belt segment (its
// rollers) and true, or false without a belt.
func (m *Model) BeltEnds() (rear, front [2]float64, ok bool) {
	if b := m.BeltSegment(); b >= 0 {
		return m.terrain[b].p0, m.terrain[b].p1, true
	}
	return rear, front, false
}

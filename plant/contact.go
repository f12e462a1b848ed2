package plant

// Event conditions of the contacts and what happens when one fires.

import "math"

// Condition indices for event detection. A condition value > 0 means
// "fine", ≤ 0 means "the event happened", NaN means "does not apply in the
// current contact mode".
const (
	condGap      = 0 // + foot: free foot gap (impact on a downward crossing)
	condNormal   = 2 // + foot: normal force of a foot in contact (lift-off)
	condFriction = 4 // + foot: μ_s N − |F_t| of a rolling foot
	condStick    = 6 // + foot: SlipDir·slip velocity of a sliding foot
	condHip      = 8 // hip height above terrain − fall limit
	condTorso    = 9 // torso angle limit − |θ_torso|
	// + 2·foot + edge: distance of a foot in contact to the backward (edge
	// 0) or forward (edge 1) edge of its terrain region. Each edge has its
	// own condition because just after a crossing the foot sits on the
	// edge behind it (margin ≈ 0, possibly a rounding below): a single
	// nearer-edge margin would start a step at ≤ 0, and a step long enough
	// to pass the next edge too would see no sign change and miss it.
	condRegion = 10
	// + leg: θ_thigh − θ_shank of an unlocked knee (knee strike when it
	// reaches 0 from above).
	condKneeStop = 14
	// + leg: lock torque of a locked knee without an engaged latch (unlock
	// when it would turn negative).
	condKneeTorque = 16
	numCond        = 18
)

// latched reports whether condition c raises its event once and then waits
// until it clears (true), or fires on every downward crossing (false).
func latched(c int) bool {
	return c == condNormal || c == condNormal+1 || c == condFriction || c == condFriction+1 ||
		c == condHip || c == condTorso || c == condKneeTorque || c == condKneeTorque+1
}

// maxTickEvents bounds the events handled inside one tick so that
// contact chatter cannot hang the loop.
const maxTickEvents = 32

// conditions evaluates every event condition at the state (q of s) with
// its evaluation ev.
// tau is the time of that state after s.T (the belt speed depends on it).
func (m *Model) conditions(s *State, q *[MaxDOF]float64, tau float64, ev *eval, c *[numCond]float64) {
	nan := math.NaN()
	for k := range c {
		c[k] = nan
	}
	for i := 0; i < m.nFeet; i++ {
		g := &ev.geom[i]
		switch s.Mode[i] {
		case Free:
			c[condGap+i] = g.gap
		case Rolling:
			c[condNormal+i] = ev.force[i][1]
			if ev.force[i][1] > 0 {
				// Without a positive normal force the foot lifts off; the
				// friction cone is then the lift-off's business.
				c[condFriction+i] = m.terrain[g.sp.seg].muS*ev.force[i][1] - math.Abs(ev.force[i][0])
			}
		case Sliding:
			c[condNormal+i] = ev.force[i][1]
			// Slip relative to the surface: a foot sticks when it moves
			// with the belt, not when it stands still in the world.
			u, _ := m.surface(s, g, tau)
			c[condStick+i] = s.SlipDir[i] * (g.slip - u)
		}
	}
	for i := 0; i < m.nFeet; i++ {
		if s.Mode[i] != Free {
			val, _, _, _ := m.regionEdges(s, i, ev.geom[i].c)
			c[condRegion+2*i], c[condRegion+2*i+1] = val[0], val[1]
		}
	}
	for j := 0; j < m.nKnees; j++ {
		kn := &m.knees[j]
		i := kn.thigh
		switch {
		case !s.KneeLocked[i]:
			c[condKneeStop+i] = kn.stop - (q[2+kn.shank] - q[2+kn.thigh])
		case !s.KneeLatched[i]:
			c[condKneeTorque+i] = ev.knee[i]
		}
	}
	if m.fallHip >= 0 {
		c[condHip] = m.hipHeight(s, q, ev) - m.fallHip
	}
	if m.fallTorso >= 0 {
		c[condTorso] = m.fallTorso - math.Abs(q[2+m.torso])
	}
}

// triggered reports whether condition k fires between values a (start) and
// b (end), given whether it has fired before without clearing.
func triggered(k int, a, b float64, fired bool) bool {
	if math.IsNaN(b) || b > 0 {
		return false
	}
	if latched(k) {
		return !fired
	}
	return a > 0
}

func finitePhase(x *phase, n int) bool {
	for i := 0; i < n; i++ {
		if !finite(x.q[i]) || !finite(x.v[i]) {
			return false
		}
	}
	return true
}

// handle acts on condition k, which fired at the current state s with
// evaluation ev, and reports whether the tick must stop.
func (m *Model) handle(s *State, in *Input, k int, ev *eval, r *TickResult) bool {
	if latched(k) {
		s.fired |= 1 << k
	}
	switch {
	case k == condGap || k == condGap+1:
		return m.touch(s, k-condGap, ev, r)
	case k == condNormal || k == condNormal+1:
		i := k - condNormal
		o := 1 - i
		e := Event{T: s.T, Foot: i, Segment: ev.geom[i].sp.seg, Value: ev.force[i][1]}
		if m.nFeet == 2 && s.Mode[o] != Free {
			e.Kind = ToeOff
			r.add(e)
			s.Mode[i] = Free
			s.KneeLatched[i] = false
			s.Stance = o
			return false
		}
		e.Kind = LiftOff
		r.add(e)
		if !m.o.ContinueOnLiftOff {
			return true
		}
		s.Mode[i] = Free
		s.KneeLatched[i] = false
		return false
	case k == condFriction || k == condFriction+1:
		i := k - condFriction
		g := &ev.geom[i]
		mu := m.terrain[g.sp.seg].muS
		r.add(Event{Kind: FrictionLimit, T: s.T, Foot: i, Segment: g.sp.seg,
			Value: utilization(ev.force[i][0], ev.force[i][1], mu), Limit: mu})
		if !m.o.ContinueOnSlip {
			return true
		}
		s.Mode[i] = Sliding
		s.SlipDir[i] = 1
		if ev.force[i][0] > 0 {
			s.SlipDir[i] = -1
		}
		return false
	case k == condStick || k == condStick+1:
		i := k - condStick
		trial := *s
		trial.Mode[i] = Rolling
		var te eval
		m.rhs(&trial, &s.Q, &s.V, in, &te)
		mu := m.terrain[te.geom[i].sp.seg].muS
		if te.ok && te.force[i][1] > 0 && math.Abs(te.force[i][0]) <= mu*te.force[i][1] {
			s.Mode[i] = Rolling
			m.setAnchor(s, i, &te.geom[i])
			r.add(Event{Kind: Stick, T: s.T, Foot: i, Segment: te.geom[i].sp.seg, Value: te.force[i][1]})
			// Remove the residual slip so the rolling constraint holds exactly.
			m.projectVelocity(s)
			return false
		}
		s.SlipDir[i] = -s.SlipDir[i]
		return false
	case k >= condRegion && k < condRegion+4:
		return m.crossRegion(s, in, (k-condRegion)/2, (k-condRegion)%2, ev, r)
	case k == condKneeStop || k == condKneeStop+1:
		return m.kneeStrike(s, k-condKneeStop, ev, r)
	case k == condKneeTorque || k == condKneeTorque+1:
		i := k - condKneeTorque
		e := Event{Kind: KneeUnlock, T: s.T, Foot: i, Segment: -1, Value: ev.knee[i]}
		if s.Mode[i] != Free {
			e.Segment = ev.geom[i].sp.seg
			if !m.p.Legs[i].Shank.Latch {
				// A knee with a latch unlocks on the ground only after
				// ReleaseKneeLatch: the controller asked for it.
				e.Kind = KneeBuckle
			}
		}
		r.add(e)
		s.KneeLocked[i] = false
		return false
	case k == condHip:
		r.add(Event{Kind: Fall, T: s.T, Foot: s.Stance, Segment: ev.geom[s.Stance].sp.seg,
			Value: m.hipHeight(s, &s.Q, ev), Limit: m.fallHip})
		return true
	case k == condTorso:
		r.add(Event{Kind: Fall, T: s.T, Foot: -1, Segment: -1, Value: s.Q[2+m.torso], Limit: m.fallTorso})
		return true
	}
	return false
}

// crossRegion moves foot i's contact across edge e (0 backward, 1
// forward) of its terrain region: onto a convex vertex or the next segment
// (a break point for the integrator, no event), or, at a concave corner,
// into an impact with the next segment (a Touchdown event on that segment).
func (m *Model) crossRegion(s *State, in *Input, i, e int, ev *eval, r *TickResult) bool {
	_, kind, seg, vertex := m.regionEdges(s, i, ev.geom[i].c)
	if kind[e] == edgeNone {
		return false
	}
	s.Seg[i], s.vertex[i] = seg[e], vertex[e]
	var tr trig
	m.trigOf(&s.Q, &tr)
	var g footGeom
	m.footGeometryOf(s, &s.Q, &s.V, &tr, i, &g)
	if kind[e] != edgeImpact {
		if s.Mode[i] == Rolling {
			m.setAnchor(s, i, &g)
		}
		return false
	}
	var ne eval
	m.rhs(s, &s.Q, &s.V, in, &ne)
	stop := m.impact(s, i, false, &ne, r)
	if s.Mode[i] == Rolling {
		m.setAnchor(s, i, &ne.geom[i])
	}
	return stop
}

// hipHeight is the distance of the hip above the terrain: measured to the
// stance foot's terrain line while that foot is inside a segment region
// (cheap, and the same terrain the walker stands on), else by a search.
func (m *Model) hipHeight(s *State, q *[MaxDOF]float64, ev *eval) float64 {
	st := s.Stance
	if s.Mode[st] != Free && !s.vertex[st] {
		sg := &m.terrain[s.Seg[st]]
		return (q[0]-sg.p0[0])*sg.n[0] + (q[1]-sg.p0[1])*sg.n[1]
	}
	return m.heightAbove([2]float64{q[0], q[1]}, ev.geom[st].sp.seg)
}

package plant

import "math"

// Condition indices for event detection. A condition value > 0 means
// "fine", ≤ 0 means "the event happened", NaN means "does not apply in the
// current contact mode".
const (
	condGap      = 0  // + foot: free foot gap (impact on a downward crossing)
	condNormal   = 2  // + foot: normal force of a foot in contact (lift-off)
	condFriction = 4  // + foot: μ_s N − |F_t| of a rolling foot
	condStick    = 6  // + foot: SlipDir·slip velocity of a sliding foot
	condHip      = 8  // hip height above terrain − fall limit
	condTorso    = 9  // torso angle limit − |θ_torso|
	condRegion   = 10 // + foot: distance of a foot in contact to the edge of its terrain region
	numCond      = 12
)

// latched reports whether condition c raises its event once and then waits
// until it clears (true), or fires on every downward crossing (false).
func latched(c int) bool {
	return c == condNormal || c == condNormal+1 || c == condFriction || c == condFriction+1 ||
		c == condHip || c == condTorso
}

// maxTickIterations bounds the sub-steps plus events inside one tick so that
// contact chatter cannot hang the loop.
const maxTickEvents = 32

// conditions evaluates every event condition at the state (q of s) with
// its evaluation ev.
func (m *Model) conditions(s *State, q *[MaxDOF]float64, ev *eval, c *[numCond]float64) {
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
			c[condStick+i] = s.SlipDir[i] * g.slip
		}
	}
	for i := 0; i < m.nFeet; i++ {
		if s.Mode[i] != Free {
			c[condRegion+i] = m.regionMargin(s, i, &ev.geom[i])
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

// Step advances s by one control tick of length dt with the input held
// constant, using Options.SubSteps RK4 sub-steps. Events inside the tick
// (heel strike, lift-off, friction limit, …) are located to well under a
// microsecond and handled at their time; the rest of the tick continues
// from there. At the end of the tick the state is projected back onto the
// contact constraints (positions, then velocities, M-weighted). r receives
// the contact records at the end of the tick and the events. If a stopping
// event happens (a fall, a non-finite state, or a slip or lift-off that the
// options do not continue), r.Stopped is set and s is left at the event.
// Step does not allocate.
func (m *Model) Step(s *State, in *Input, dt float64, r *TickResult) {
	*r = TickResult{}
	m.sanitize(s)
	if !(dt > 0) || !finite(dt) {
		r.add(Event{Kind: BadInput, T: s.T, Foot: -1, Segment: -1, Value: dt})
		r.Stopped = true
		return
	}
	if in != nil {
		for j := 0; j < m.nAct; j++ {
			if !finite(in.Torque[j]) {
				r.add(Event{Kind: BadInput, T: s.T, Foot: -1, Segment: -1, Value: in.Torque[j]})
				r.Stopped = true
				return
			}
		}
		if !finite(in.HipForce[0]) || !finite(in.HipForce[1]) {
			r.add(Event{Kind: BadInput, T: s.T, Foot: -1, Segment: -1, Value: in.HipForce[0] + in.HipForce[1]})
			r.Stopped = true
			return
		}
	}
	h := dt / float64(m.o.SubSteps)
	tEnd := s.T + dt
	var evA, evB eval
	cur, nxt := &evA, &evB // swapped, not copied, after each sub-step
	m.rhs(s, &s.Q, &s.V, in, cur)
	if !cur.ok {
		m.nonFinite(s, r)
		return
	}
	events := 0
	var c0, c1 [numCond]float64
	m.conditions(s, &s.Q, cur, &c0)
	for s.T < tEnd-1e-9*h {
		hh := math.Min(h, tEnd-s.T)
		x0 := phase{q: s.Q, v: s.V}
		var x1 phase
		ok := m.rk4(s, &x0, cur, hh, in, &x1)
		if ok {
			m.rhs(s, &x1.q, &x1.v, in, nxt)
		}
		if !ok || !nxt.ok || !finitePhase(&x1, m.n) {
			m.nonFinite(s, r)
			return
		}
		m.conditions(s, &x1.q, nxt, &c1)
		first, tau := -1, hh
		for k := 0; k < numCond; k++ {
			if !triggered(k, c0[k], c1[k], s.fired&(1<<k) != 0) {
				continue
			}
			tk := 0.0
			if !latched(k) || c0[k] > 0 {
				tk = m.locate(s, &x0, cur, in, k, c0[k], c1[k], hh)
			}
			if first < 0 || tk < tau {
				first, tau = k, tk
			}
		}
		if first < 0 {
			s.Q, s.V = x1.q, x1.v
			s.T += hh
			cur, nxt = nxt, cur
			for i := 0; i < m.nFeet; i++ {
				m.setRegion(s, i, &cur.geom[i])
			}
			for k := 0; k < numCond; k++ {
				if !(c1[k] <= 0) {
					s.fired &^= 1 << k
				}
			}
			c0 = c1
			continue
		}
		events++
		if events > maxTickEvents {
			r.add(Event{Kind: Chatter, T: s.T, Foot: -1, Segment: -1, Value: float64(events)})
			r.Stopped = true
			m.fillContacts(s, cur, r)
			return
		}
		if tau > 0 {
			var xe phase
			m.rk4(s, &x0, cur, tau, in, &xe)
			s.Q, s.V = xe.q, xe.v
			s.T += tau
		}
		m.rhs(s, &s.Q, &s.V, in, cur)
		stop := m.handle(s, in, first, cur, r)
		m.rhs(s, &s.Q, &s.V, in, cur)
		m.conditions(s, &s.Q, cur, &c0)
		if stop || !cur.ok {
			if !cur.ok {
				m.nonFinite(s, r)
				return
			}
			r.Stopped = true
			m.fillContacts(s, cur, r)
			return
		}
	}
	s.T = tEnd
	if m.project(s) {
		m.rhs(s, &s.Q, &s.V, in, cur)
		if !cur.ok {
			m.nonFinite(s, r)
			return
		}
	}
	m.fillContacts(s, cur, r)
}

func (m *Model) fillContacts(s *State, ev *eval, r *TickResult) {
	for i := 0; i < m.nFeet; i++ {
		m.contactRecord(s, ev, i, &r.Contacts[i])
	}
}

func (m *Model) nonFinite(s *State, r *TickResult) {
	r.add(Event{Kind: NonFinite, T: s.T, Foot: -1, Segment: -1})
	r.Stopped = true
}

// locate finds the time τ in (0, h] at which condition k crosses zero on
// the RK4 sub-step from x0, by the Illinois variant of regula falsi on the
// step length (each trial re-integrates from x0, so the located state is as
// accurate as the sub-step itself). It returns a time at or just after the
// crossing (where the condition is ≤ 0, so the state handed to the event
// is on the far side of it), within 1e-12 s.
func (m *Model) locate(s *State, x0 *phase, k1 *eval, in *Input, k int, fa, fb, h float64) float64 {
	a, b := 0.0, h
	side := 0
	var x phase
	var ev eval
	var c [numCond]float64
	for it := 0; it < 100 && b-a > 1e-13; it++ {
		t := b - fb*(b-a)/(fb-fa)
		if !(t > a && t < b) {
			t = 0.5 * (a + b)
		}
		m.rk4(s, x0, k1, t, in, &x)
		m.rhs(s, &x.q, &x.v, in, &ev)
		m.conditions(s, &x.q, &ev, &c)
		f := c[k]
		if math.IsNaN(f) {
			f = fb
		}
		if f <= 0 {
			b, fb = t, f
			if side == -1 {
				fa *= 0.5
			}
			side = -1
		} else {
			a, fa = t, f
			if side == +1 {
				fb *= 0.5
			}
			side = +1
		}
		if f <= 0 && (f == 0 || -f < 1e-15*(math.Abs(fa)+math.Abs(fb))) {
			return t
		}
	}
	return b
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
			s.Stance = o
			return false
		}
		e.Kind = LiftOff
		r.add(e)
		if !m.o.ContinueOnLiftOff {
			return true
		}
		s.Mode[i] = Free
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
	case k == condRegion || k == condRegion+1:
		return m.crossRegion(s, in, k-condRegion, ev, r)
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

// crossRegion moves foot i's contact across the edge of its terrain region
// that it reached: onto a convex vertex or the next segment (a break point
// for the integrator, no event), or, at a concave corner, into an impact
// with the next segment (a Touchdown event on that segment).
func (m *Model) crossRegion(s *State, in *Input, i int, ev *eval, r *TickResult) bool {
	val, kind, seg, vertex := m.regionEdges(s, i, ev.geom[i].c)
	e := 1
	if math.IsNaN(val[1]) || (!math.IsNaN(val[0]) && val[0] < val[1]) {
		e = 0
	}
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

// sanitize repairs the bookkeeping fields of a state a caller may have
// built or edited by hand (segment indices, stance, modes, slip
// directions), so that a bad value gives sensible physics or a clear event
// instead of an index out of range.
func (m *Model) sanitize(s *State) {
	last := len(m.terrain) - 1
	if s.Stance < 0 || s.Stance >= m.nFeet {
		s.Stance = 0
	}
	for i := 0; i < 2; i++ {
		if s.Seg[i] < 0 || s.Seg[i] > last {
			s.Seg[i], s.vertex[i] = m.segmentAtX(s.Q[0]), false
		}
		if s.vertex[i] && s.Seg[i] == last {
			s.vertex[i] = false
		}
		if s.Mode[i] > Sliding || i >= m.nFeet {
			s.Mode[i] = Free
		}
		if s.Mode[i] == Sliding && s.SlipDir[i] != 1 && s.SlipDir[i] != -1 {
			s.SlipDir[i] = 1
		}
	}
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

package plant

import "math"

// Step advances s by one control tick of length dt with the input held
// constant, using Options.SubSteps RK4 sub-steps. Events inside the tick
// (heel strike, lift-off, friction limit, …) are located to well under a
// microsecond and handled at their time; the rest of the tick continues
// from there. At the end of the tick the state is projected back onto the
// contact constraints (positions, then velocities, M-weighted). r receives
// the contact records at the end of the tick and the events. If a stopping
// event happens (a fall, a non-finite state, contact chatter, a bad input,
// or a slip or lift-off that the options do not continue), r.Stopped is set
// and s is left at the event.
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
		if !finite(in.Belt.Speed) || !finite(in.Belt.Accel) {
			r.add(Event{Kind: BadInput, T: s.T, Foot: -1, Segment: -1, Value: in.Belt.Speed + in.Belt.Accel})
			r.Stopped = true
			return
		}
	}
	m.setBelt(s, in)
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
	m.conditions(s, &s.Q, 0, cur, &c0)
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
		m.conditions(s, &x1.q, hh, nxt, &c1)
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
			m.rideBelt(s, hh)
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
			m.rideBelt(s, tau)
			s.Q, s.V = xe.q, xe.v
			s.T += tau
		}
		m.rhs(s, &s.Q, &s.V, in, cur)
		stop := m.handle(s, in, first, cur, r)
		m.rhs(s, &s.Q, &s.V, in, cur)
		m.conditions(s, &s.Q, 0, cur, &c0)
		if !cur.ok {
			m.nonFinite(s, r)
			return
		}
		if stop {
			r.Stopped = true
			m.fillContacts(s, cur, r)
			return
		}
	}
	s.T = tEnd
	if m.project(s, cur) {
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
	var x phase
	var ev eval
	var c [numCond]float64
	return illinois(fa, fb, h, 1e-13, 1e-15, func(t float64) float64 {
		m.rk4(s, x0, k1, t, in, &x)
		m.rhs(s, &x.q, &x.v, in, &ev)
		m.conditions(s, &x.q, t, &ev, &c)
		return c[k]
	})
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

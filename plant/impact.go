package plant

import "math"

// solveImpulse solves [M −Wᵀ; J 0][Δv; Λ] = [0; −J v⁻] for Λ and applies
// Δv to v. It reports false if the system is singular.
func (m *Model) solveImpulse(q *[MaxDOF]float64, v *[MaxDOF]float64, rows *saddle, lam *[maxRows]float64) bool {
	var tr trig
	m.trigOf(q, &tr)
	for r := 0; r < rows.k; r++ {
		rows.bottom[r] = -dot(&rows.j[r], v, m.n)
		if g := rows.goal[r]; g != 0 {
			// Off the belt goal is 0 and the arithmetic is unchanged.
			rows.bottom[r] += g
		}
	}
	var f, dv [MaxDOF]float64
	if !m.solveSaddle(&tr, &f, rows, &dv, lam) {
		return false
	}
	for i := 0; i < m.n; i++ {
		v[i] += dv[i]
	}
	return true
}

// touch handles a downward crossing of foot i's gap: a heel strike if it is
// the swing foot landing ahead of the stance foot by more than MinStride,
// otherwise a scuff (ignored when Options.IgnoreScuff) or a touchdown. It
// reports whether the tick must stop.
func (m *Model) touch(s *State, i int, ev *eval, r *TickResult) bool {
	st := s.Stance
	heel := false
	if i != st {
		gs, gi := &ev.geom[st], &ev.geom[i]
		stride := gs.sp.t[0]*(gi.sp.p[0]-gs.sp.p[0]) + gs.sp.t[1]*(gi.sp.p[1]-gs.sp.p[1])
		heel = stride > m.minStride
		if !heel {
			r.add(Event{Kind: Scuff, T: s.T, Foot: i, Segment: gi.sp.seg, Value: stride, Limit: m.minStride})
			if m.o.IgnoreScuff {
				return false
			}
		}
	}
	return m.impact(s, i, heel, ev, r)
}

// impact applies a perfectly plastic, no-slip impulse to foot i and to the
// other feet in contact; a foot that would need a pulling impulse is
// released and the impulse solved again; a foot whose impulse leaves the
// friction cone (|Λ_t| > μ_s Λ_n) is resolved on the cone boundary.
func (m *Model) impact(s *State, i int, heel bool, ev *eval, r *TickResult) bool {
	ke0 := m.kineticOnSurface(s, &s.V, &ev.geom[i])
	var active [2]bool
	active[i] = true
	for f := 0; f < m.nFeet; f++ {
		if f != i && s.Mode[f] != Free {
			active[f] = true
		}
	}
	var rows saddle
	var lam [maxRows]float64
	var slipSign [2]float64 // ≠ 0: foot on the cone boundary with Λ_t = μ_s σ Λ_n
	var demanded [2]float64 // |Λ_t|/Λ_n of the no-slip solution
	v := s.V
	for attempt := 0; attempt < 6; attempt++ {
		v = s.V
		m.contactImpulseRows(s, ev, &active, &slipSign, &rows)
		// A locked knee stays locked through the impulse (the stance knee
		// and the trailing knee alike), as published kneed passive gaits
		// assume for the trailing leg.
		m.kneeRows(s, &rows, nil)
		if !m.solveImpulse(&s.Q, &v, &rows, &lam) {
			// Redundant contacts (e.g. two arc feet whose centres are both
			// the hip): keep the impacting foot alone.
			released := false
			for f := 0; f < m.nFeet; f++ {
				if active[f] && f != i {
					active[f], slipSign[f], released = false, 0, true
				}
			}
			if released {
				continue
			}
			m.nonFinite(s, r)
			return true
		}
		var lt, ln [2]float64
		for k := 0; k < rows.k; k++ {
			f := rows.foot[k]
			if rows.kind[k] == 0 {
				lt[f] = lam[k]
			} else if rows.kind[k] == 1 {
				ln[f] = lam[k]
			}
		}
		changed := false
		for f := 0; f < m.nFeet; f++ {
			if active[f] && f != i && ln[f] < 0 {
				active[f] = false
				slipSign[f] = 0
				changed = true
			}
		}
		if changed {
			continue
		}
		for f := 0; f < m.nFeet; f++ {
			if !active[f] || slipSign[f] != 0 {
				continue
			}
			mu := m.terrain[ev.geom[f].sp.seg].muS
			if ln[f] > 0 {
				demanded[f] = math.Abs(lt[f]) / ln[f]
			}
			if ln[f] > 0 && math.Abs(lt[f]) > mu*ln[f] {
				slipSign[f] = 1
				if lt[f] < 0 {
					slipSign[f] = -1
				}
				changed = true
			}
		}
		if !changed {
			break
		}
	}
	s.V = v
	ke1 := m.kineticOnSurface(s, &s.V, &ev.geom[i])
	stop := m.impactSlips(s, ev, &slipSign, &demanded, r)
	kind := Touchdown
	if heel {
		kind = HeelStrike
		s.Stance = i
		if j := m.kneeOf[i]; j >= 0 && s.KneeLocked[i] && m.p.Legs[i].Shank.Latch {
			s.KneeLatched[i] = true
		}
	}
	gi := &ev.geom[i]
	r.add(Event{Kind: kind, T: s.T, Foot: i, Segment: gi.sp.seg, Value: demanded[i],
		Limit: m.terrain[gi.sp.seg].muS, EnergyLost: ke0 - ke1})
	for f := 0; f < m.nFeet; f++ {
		prev := s.Mode[f]
		switch {
		case !active[f]:
			s.Mode[f] = Free
			s.KneeLatched[f] = false
		case slipSign[f] != 0:
			s.Mode[f] = Sliding
			var g footGeom
			m.footGeometry(&s.Q, &s.V, f, ev.geom[f].sp.seg, &g)
			// slipSign is the sign of the friction impulse, which opposes
			// the slip: with no slip velocity to read yet, the foot slides
			// the other way.
			s.SlipDir[f] = -slipSign[f]
			if u, _ := m.surface(s, &g, 0); g.slip != u {
				s.SlipDir[f] = math.Copysign(1, g.slip-u)
			}
		default:
			s.Mode[f] = Rolling
			if prev != Rolling {
				m.setAnchor(s, f, &ev.geom[f])
			}
		}
		if s.Mode[f] != prev {
			s.fired &^= 1<<(condNormal+f) | 1<<(condFriction+f)
		}
	}
	if s.Mode[s.Stance] == Free && m.nFeet == 2 && s.Mode[1-s.Stance] != Free {
		s.Stance = 1 - s.Stance
	}
	return stop
}

// contactImpulseRows sets rows (from row 0) to the impulse rows of the
// feet in contact (active), as a heel strike and a knee strike both solve
// them: for each foot a no-slip tangential row, unless slipSign puts the
// foot on the friction cone's boundary, and a normal row whose work row
// adds μ_s·slipSign times the tangential one (Λ_t = μ_s σ Λ_n). No slip is
// relative to the surface: on the belt the foot leaves the impact moving
// with it.
func (m *Model) contactImpulseRows(s *State, ev *eval, active *[2]bool, slipSign *[2]float64, rows *saddle) {
	rows.k = 0
	for f := 0; f < m.nFeet; f++ {
		if !active[f] {
			continue
		}
		g := &ev.geom[f]
		if slipSign[f] == 0 {
			rows.j[rows.k], rows.w[rows.k], rows.foot[rows.k], rows.kind[rows.k] = g.jt, g.jt, f, 0
			rows.goal[rows.k], _ = m.surface(s, g, 0)
			rows.k++
		}
		rows.j[rows.k], rows.foot[rows.k], rows.kind[rows.k], rows.goal[rows.k] = g.jn, f, 1, 0
		mu := m.terrain[g.sp.seg].muS * slipSign[f]
		for d := 0; d < m.n; d++ {
			rows.w[rows.k][d] = g.jn[d] + mu*g.jt[d]
		}
		rows.k++
	}
}

// kneeStrike locks leg i's knee, which reached its stop with a closing
// rate, by a plastic impulse: the knee's relative rate and the velocity of
// every foot in contact (no slip, as at a heel strike) become zero, with
// every other locked knee held. A foot that would need a pulling impulse
// is released and the impulse solved again; a foot whose impulse leaves
// the friction cone (|Λ_t| > μ_s Λ_n) is resolved on the cone boundary and
// reported as at a heel strike (ImpactSlip, after the KneeStrike event;
// the tick stops unless Options.ContinueOnSlip). The latch engages if the
// leg has one. It reports whether the tick must stop.
func (m *Model) kneeStrike(s *State, i int, ev *eval, r *TickResult) bool {
	kn := &m.knees[m.kneeOf[i]]
	closing := s.V[2+kn.shank] - s.V[2+kn.thigh]
	s.KneeLocked[i] = true
	s.KneeLatched[i] = m.p.Legs[i].Shank.Latch
	ke0, _ := m.Energy(s)
	var active [2]bool
	for f := 0; f < m.nFeet; f++ {
		active[f] = s.Mode[f] != Free
	}
	var rows saddle
	var lam [maxRows]float64
	var slipSign [2]float64 // ≠ 0: foot on the cone boundary with Λ_t = μ_s σ Λ_n
	var demanded [2]float64 // |Λ_t|/Λ_n of the no-slip solution
	v := s.V
	solved := false
	for attempt := 0; attempt < 6 && !solved; attempt++ {
		v = s.V
		m.contactImpulseRows(s, ev, &active, &slipSign, &rows)
		m.kneeRows(s, &rows, nil)
		if !m.solveImpulse(&s.Q, &v, &rows, &lam) {
			m.nonFinite(s, r)
			return true
		}
		solved = true
		var lt, ln [2]float64
		for k := 0; k < rows.k; k++ {
			f := rows.foot[k]
			switch rows.kind[k] {
			case 0:
				lt[f] = lam[k]
			case 1:
				ln[f] = lam[k]
				if lam[k] < 0 {
					active[f], slipSign[f], solved = false, 0, false
				}
			}
		}
		if !solved {
			continue
		}
		for f := 0; f < m.nFeet; f++ {
			if !active[f] || slipSign[f] != 0 || !(ln[f] > 0) {
				continue
			}
			mu := m.terrain[ev.geom[f].sp.seg].muS
			demanded[f] = math.Abs(lt[f]) / ln[f]
			if math.Abs(lt[f]) > mu*ln[f] {
				slipSign[f] = math.Copysign(1, lt[f])
				solved = false
			}
		}
	}
	s.V = v
	for f := 0; f < m.nFeet; f++ {
		prev := s.Mode[f]
		switch {
		case !active[f] && prev != Free:
			// Released: the foot leaves the ground, and its latch with it.
			s.Mode[f] = Free
			s.KneeLatched[f] = false
		case active[f] && slipSign[f] != 0:
			s.Mode[f] = Sliding
			var g footGeom
			m.footGeometry(&s.Q, &s.V, f, ev.geom[f].sp.seg, &g)
			// As at a heel strike: the friction impulse opposes the slip.
			s.SlipDir[f] = -slipSign[f]
			if u, _ := m.surface(s, &g, 0); g.slip != u {
				s.SlipDir[f] = math.Copysign(1, g.slip-u)
			}
		}
		if s.Mode[f] != prev {
			s.fired &^= 1<<(condNormal+f) | 1<<(condFriction+f)
		}
	}
	if s.Mode[s.Stance] == Free && m.nFeet == 2 && s.Mode[1-s.Stance] != Free {
		s.Stance = 1 - s.Stance
	}
	ke1, _ := m.Energy(s)
	r.add(Event{Kind: KneeStrike, T: s.T, Foot: i, Segment: -1, Value: closing, EnergyLost: ke0 - ke1})
	stop := m.impactSlips(s, ev, &slipSign, &demanded, r)
	return stop
}

// impactSlips reports an impact_slip for each foot an impulse left on the
// friction cone's boundary (slipSign ≠ 0), with the friction the no-slip
// impulse would have demanded, |Λ_t|/Λ_n, against μ_s; it says whether the
// run stops there (unless Options.ContinueOnSlip). Heel strike and knee
// strike report alike.
func (m *Model) impactSlips(s *State, ev *eval, slipSign, demanded *[2]float64, r *TickResult) (stop bool) {
	for f := 0; f < m.nFeet; f++ {
		if slipSign[f] == 0 {
			continue
		}
		mu := m.terrain[ev.geom[f].sp.seg].muS
		r.add(Event{Kind: ImpactSlip, T: s.T, Foot: f, Segment: ev.geom[f].sp.seg, Value: demanded[f], Limit: mu})
		if !m.o.ContinueOnSlip {
			stop = true
		}
	}
	return stop
}

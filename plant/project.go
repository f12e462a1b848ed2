package plant

import "math"

// projectTol is the constraint residual, relative to the leg length (and
// for velocities to √(gL)), below which a projection is skipped: a
// correction that small changes nothing a caller can see, and skipping it
// saves work in most ticks. Residuals never accumulate beyond it.
const projectTol = 1e-13

// projectRows builds the constraint rows of the feet in contact at s.Q: the
// normal row (gap) for every foot in contact, and the tangential row
// (rolling anchor) for a rolling foot; res receives the position residuals.
// A foot in contact keeps its recorded terrain region (footGeometryOf), so
// its region, and with it the anchor, cannot change here. ev, when not
// nil, is an evaluation at s.Q and s.V with the modes of s (the one a tick
// ends with): its geometry of a foot in its recorded region is used as it
// is instead of being computed again.
func (m *Model) projectRows(s *State, rows *saddle, res *[maxRows]float64, ev *eval) {
	rows.k = 0
	var tr trig
	haveTrig := false
	for f := 0; f < m.nFeet; f++ {
		if s.Mode[f] == Free {
			continue
		}
		var g footGeom
		if ev != nil && ev.geom[f].sp.seg == s.Seg[f] && ev.geom[f].sp.clamped == (s.vertex[f] && s.Seg[f] < len(m.terrain)-1) {
			g = ev.geom[f]
		} else {
			if !haveTrig {
				m.trigOf(&s.Q, &tr)
				haveTrig = true
			}
			m.footGeometryOf(s, &s.Q, &s.V, &tr, f, &g)
		}
		if s.Mode[f] == Rolling {
			c := g.c
			rows.j[rows.k], rows.w[rows.k], rows.foot[rows.k], rows.kind[rows.k] = g.jt, g.jt, f, 0
			res[rows.k] = g.sp.t[0]*c[0] + g.sp.t[1]*c[1] + m.feet[f].radius*s.Q[2+m.feet[f].link] - s.Anchor[f]
			if g.sp.clamped {
				res[rows.k] = 0
			}
			rows.goal[rows.k], _ = m.surface(s, &g, 0)
			rows.k++
		}
		rows.j[rows.k], rows.w[rows.k], rows.foot[rows.k], rows.kind[rows.k] = g.jn, g.jn, f, 1
		res[rows.k] = g.gap
		rows.goal[rows.k] = 0
		rows.k++
	}
	m.kneeRows(s, rows, res)
}

// project moves s back onto the contact constraints: the positions by
// M-weighted Gauss–Newton steps Δq = −M⁻¹Jᵀ(J M⁻¹ Jᵀ)⁻¹ g(q), then the
// velocities by the same projection of J q̇ (the least kinetic-energy
// change that satisfies the constraints). It reports whether it changed s.
// ev is an evaluation at s (see projectRows) or nil.
func (m *Model) project(s *State, ev *eval) bool {
	if ev != nil && m.wellInside(s, ev) {
		return false
	}
	var rows saddle
	var res [maxRows]float64
	changed := false
	for it := 0; it < 2; it++ {
		m.projectRows(s, &rows, &res, ev)
		ev = nil // q changes below
		if rows.k == 0 {
			return changed
		}
		worst := 0.0
		for r := 0; r < rows.k; r++ {
			worst = math.Max(worst, math.Abs(res[r]))
		}
		if worst <= projectTol*m.reach {
			break
		}
		var dq [MaxDOF]float64
		var lam [maxRows]float64
		if !m.solveCorrection(&s.Q, &rows, &res, &dq, &lam) {
			return changed
		}
		for i := 0; i < m.n; i++ {
			s.Q[i] += dq[i]
		}
		changed = true
	}
	if changed {
		m.projectRows(s, &rows, &res, nil)
	}
	return m.projectVelocityRows(s, &rows) || changed
}

// projectVelocity removes the constraint-violating part of q̇.
func (m *Model) projectVelocity(s *State) {
	var rows saddle
	var res [maxRows]float64
	m.projectRows(s, &rows, &res, nil)
	m.projectVelocityRows(s, &rows)
}

// projectVelocityRows projects q̇ with rows built at the current q and
// reports whether it changed it.
func (m *Model) projectVelocityRows(s *State, rows *saddle) bool {
	if rows.k == 0 {
		return false
	}
	worst := 0.0
	for r := 0; r < rows.k; r++ {
		worst = math.Max(worst, math.Abs(dot(&rows.j[r], &s.V, m.n)-rows.goal[r]))
	}
	if worst <= projectTol*math.Sqrt(m.reach*m.p.Gravity) {
		return false
	}
	var lam [maxRows]float64
	v := s.V
	if m.solveImpulse(&s.Q, &v, rows, &lam) {
		s.V = v
		return true
	}
	return false
}

// solveCorrection finds the M-weighted least correction dq with J dq = −res:
// [M −Jᵀ; J 0][dq; λ] = [0; −res].
func (m *Model) solveCorrection(q *[MaxDOF]float64, rows *saddle, res *[maxRows]float64, dq *[MaxDOF]float64, lam *[maxRows]float64) bool {
	var tr trig
	m.trigOf(q, &tr)
	for r := 0; r < rows.k; r++ {
		rows.bottom[r] = -res[r]
	}
	var f [MaxDOF]float64
	*dq = [MaxDOF]float64{}
	return m.solveSaddle(&tr, &f, rows, dq, lam)
}

// wellInside reports whether every constraint residual at s, read from the
// geometry of the evaluation ev at s, is below half the projection
// tolerance, so that project would change nothing; it saves building the
// constraint rows in the common tick. It answers false (and project
// decides the long way) when ev's geometry is not that of a foot's
// recorded region, and near the tolerance, where the sums here and in
// projectRows may round differently.
func (m *Model) wellInside(s *State, ev *eval) bool {
	posTol := 0.5 * projectTol * m.reach
	velTol := 0.5 * projectTol * math.Sqrt(m.reach*m.p.Gravity)
	for f := 0; f < m.nFeet; f++ {
		if s.Mode[f] == Free {
			continue
		}
		g := &ev.geom[f]
		if g.sp.seg != s.Seg[f] || g.sp.clamped != (s.vertex[f] && s.Seg[f] < len(m.terrain)-1) {
			return false
		}
		if !(math.Abs(g.gap) <= posTol) || !(math.Abs(g.vn) <= velTol) {
			return false
		}
		if s.Mode[f] == Rolling {
			if !g.sp.clamped {
				c := g.c
				res := g.sp.t[0]*c[0] + g.sp.t[1]*c[1] + m.feet[f].radius*s.Q[2+m.feet[f].link] - s.Anchor[f]
				if !(math.Abs(res) <= posTol) {
					return false
				}
			}
			u, _ := m.surface(s, g, 0)
			if !(math.Abs(g.slip-u) <= velTol) {
				return false
			}
		}
	}
	for i := 0; i < m.nFeet; i++ {
		j := m.kneeOf[i]
		if j < 0 || !s.KneeLocked[i] {
			continue
		}
		kn := &m.knees[j]
		if !(math.Abs(s.Q[2+kn.shank]-s.Q[2+kn.thigh]-kn.stop) <= posTol) || !(math.Abs(s.V[2+kn.shank]-s.V[2+kn.thigh]) <= velTol) {
			return false
		}
	}
	return true
}

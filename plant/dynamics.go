package plant

import "math"

// footGeom is the contact geometry of one foot at one state.
type footGeom struct {
	sp     surfacePoint
	c      [2]float64 // arc centre
	gap    float64
	jt, jn [MaxDOF]float64 // contact Jacobian rows: t·v_p and n·v_p
	gt, gn float64         // J̇ q̇ for the two rows
	slip   float64         // t·v_p, tangential velocity of the material point
	vn     float64         // n·v_p
	axis   [2]float64      // a(θ) of the foot's link (for the centre of pressure)
}

// footGeometry computes the contact geometry of foot i. The material point
// at the contact moves with v_centre + ω ẑ × (−R n) = v_centre + R ω t.
// The terrain point is the closest one, searched from segment hint.
func (m *Model) footGeometry(q, v *[MaxDOF]float64, i, hint int, g *footGeom) {
	var tr trig
	tr.a[i], tr.ap[i] = axis(q[2+i])
	if fl := m.feet[i].link; fl != i {
		tr.a[fl], tr.ap[fl] = axis(q[2+fl])
	}
	m.footGeometryTrig(q, v, &tr, i, hint, -1, g)
}

// footGeometryOf is footGeometry for foot i of state s at (q, v): a foot in
// contact keeps the terrain region recorded in s (so the contact geometry
// is smooth until a located region change), a free foot searches.
func (m *Model) footGeometryOf(s *State, q, v *[MaxDOF]float64, tr *trig, i int, g *footGeom) {
	region := int8(-1)
	if s.Mode[i] != Free {
		region = 0
		if s.vertex[i] {
			region = 1
		}
	}
	m.footGeometryTrig(q, v, tr, i, s.Seg[i], region, g)
}

// footGeometryTrig computes the geometry with the link trigonometry given.
// region −1 searches the closest terrain point from segment hint; 0 uses
// the line of segment hint; 1 the vertex at the end of segment hint.
func (m *Model) footGeometryTrig(q, v *[MaxDOF]float64, tr *trig, i, hint int, region int8, g *footGeom) {
	// The arc centre and its first and second derivatives with respect to
	// the leg angle, written out here (as in footCentre) because this
	// is the innermost loop.
	f := &m.feet[i]
	a, ap := &tr.a[f.link], &tr.ap[f.link]
	kk := f.length - f.radius
	base := [2]float64{q[0], q[1]}
	if f.thigh != 0 {
		// Kneed leg: the foot's link hangs from the knee, hip + ℓ a(θ_thigh).
		base[0] += f.thigh * tr.a[i][0]
		base[1] += f.thigh * tr.a[i][1]
	}
	c := [2]float64{base[0] + kk*a[0] + f.offset*ap[0], base[1] + kk*a[1] + f.offset*ap[1]}
	dc := [2]float64{kk*ap[0] - f.offset*a[0], kk*ap[1] - f.offset*a[1]}
	ddc := [2]float64{-kk*a[0] - f.offset*ap[0], -kk*a[1] - f.offset*ap[1]}
	g.c = c
	g.axis = *a
	if region < 0 {
		m.closest(c, hint, &g.sp)
	} else {
		m.surfaceInRegion(c, hint, region == 1, &g.sp)
	}
	g.gap = g.sp.dist - f.radius
	t, nn := g.sp.t, g.sp.n
	k := 2 + f.link
	// Only entries 0, 1, 2+link (and 2+i, the thigh, for a kneed leg) are
	// ever written for foot i, so the others stay zero in a footGeom that is
	// only used for one foot (as eval.geom and every local one are); not
	// clearing them saves time in the hot loop.
	g.jt[0], g.jt[1] = t[0], t[1]
	g.jn[0], g.jn[1] = nn[0], nn[1]
	g.jt[k] = t[0]*dc[0] + t[1]*dc[1] + f.radius
	g.jn[k] = nn[0]*dc[0] + nn[1]*dc[1]
	w2 := v[k] * v[k]
	g.gt = (t[0]*ddc[0] + t[1]*ddc[1]) * w2
	g.gn = (nn[0]*ddc[0] + nn[1]*ddc[1]) * w2
	g.slip = t[0]*v[0] + t[1]*v[1] + g.jt[k]*v[k]
	g.vn = nn[0]*v[0] + nn[1]*v[1] + g.jn[k]*v[k]
	if f.thigh != 0 {
		// The knee moves with the thigh: ∂c/∂θ_thigh = ℓ a⊥(θ_thigh), and
		// its second derivative −ℓ a(θ_thigh) adds to J̇q̇. The rolling
		// term R θ̇ belongs to the foot's own link, the shank.
		th := 2 + i
		at, apt := &tr.a[i], &tr.ap[i]
		dk := [2]float64{f.thigh * apt[0], f.thigh * apt[1]}
		wt2 := v[th] * v[th]
		g.jt[th] = t[0]*dk[0] + t[1]*dk[1]
		g.jn[th] = nn[0]*dk[0] + nn[1]*dk[1]
		g.gt -= (t[0]*at[0] + t[1]*at[1]) * f.thigh * wt2
		g.gn -= (nn[0]*at[0] + nn[1]*at[1]) * f.thigh * wt2
		g.slip += g.jt[th] * v[th]
		g.vn += g.jn[th] * v[th]
	}
	if g.sp.clamped && g.sp.dist > 0 {
		// Contact at a convex vertex: the normal turns with the arc centre
		// about the vertex at the rate (t·ċ)/d, which adds (t·ċ)²/d to the
		// normal row's J̇q̇ and −(t·ċ)(n·ċ)/d to the tangential row's.
		ct := t[0]*(v[0]+dc[0]*v[k]) + t[1]*(v[1]+dc[1]*v[k])
		cn := nn[0]*(v[0]+dc[0]*v[k]) + nn[1]*(v[1]+dc[1]*v[k])
		if f.thigh != 0 {
			th := 2 + i
			ct += f.thigh * (t[0]*tr.ap[i][0] + t[1]*tr.ap[i][1]) * v[th]
			cn += f.thigh * (nn[0]*tr.ap[i][0] + nn[1]*tr.ap[i][1]) * v[th]
		}
		g.gn += ct * ct / g.sp.dist
		g.gt -= ct * cn / g.sp.dist
	}
}

// centreOfPressure is the arc length from the point of the arc under the
// leg axis to the contact point, positive toward a⊥ (the toe). g is the
// foot's geometry at the state (its axis is the leg axis there).
func (m *Model) centreOfPressure(i int, g *footGeom) float64 {
	R := m.feet[i].radius
	if R == 0 {
		return 0
	}
	a := g.axis
	nn := g.sp.n
	return R * math.Atan2(-(a[0]*nn[1]-a[1]*nn[0]), -(a[0]*nn[0]+a[1]*nn[1]))
}

// eval is one evaluation of the right-hand side: accelerations and, for
// every foot, its geometry and contact force (F_t, N).
type eval struct {
	acc   [MaxDOF]float64
	geom  [2]footGeom
	force [2][2]float64
	knee  [2]float64 // lock torque of each leg's locked knee (FootContact.KneeTorque)
	ok    bool
}

func dot(a, b *[MaxDOF]float64, n int) float64 {
	s := 0.0
	for i := 0; i < n; i++ {
		s += a[i] * b[i]
	}
	return s
}

// rhs evaluates the constrained dynamics at (q, v) with the contact modes of
// s: M q̈ + h = Q + Wᵀ λ with J q̈ + J̇ q̇ = 0 for the constrained rows. For a
// rolling foot W = J (rows t and n); for a sliding foot only the normal row
// is constrained and its force acts along W = J_n − μ_k σ J_t. See
// solveSaddle for how the system is solved.
func (m *Model) rhs(s *State, q, v *[MaxDOF]float64, in *Input, ev *eval) {
	m.rhsGeom(s, q, v, in, ev, true)
}

// rhsGeom is rhs; with freeGeom false the geometry of free feet is not
// computed (the inner stages of a Runge–Kutta step need only q̈, and a
// free foot does not enter the dynamics).
func (m *Model) rhsGeom(s *State, q, v *[MaxDOF]float64, in *Input, ev *eval, freeGeom bool) {
	var tr trig
	m.trigOf(q, &tr)
	var f [MaxDOF]float64
	n := m.n
	m.generalizedInput(in, &f)
	m.biasTrig(&tr, v, &f)
	rolling, other := -1, 0
	for i := 0; i < m.nFeet; i++ {
		if freeGeom || s.Mode[i] != Free {
			m.footGeometryOf(s, q, v, &tr, i, &ev.geom[i])
		}
		ev.force[i] = [2]float64{}
		ev.knee[i] = 0
		switch s.Mode[i] {
		case Rolling:
			if rolling < 0 {
				rolling = i
			} else {
				other++
			}
		case Sliding:
			other++
		}
	}
	if rolling >= 0 && other == 0 && m.nKnees == 0 {
		var lam [maxRows]float64
		g := &ev.geom[rolling]
		gt := g.gt
		if m.onBelt(g) {
			// J_t q̈ + J̇_t q̇ = du/dt: the material point keeps the
			// surface's tangential velocity (package doc, "Moving ground").
			gt += s.belt.Accel
		}
		ev.ok = m.rhsOneFoot(&tr, &f, rolling, g, gt, &ev.acc, &lam)
		ev.force[rolling] = [2]float64{lam[0], lam[1]}
		return
	}
	var sd saddle
	k := 0
	for i := 0; i < m.nFeet; i++ {
		g := &ev.geom[i]
		switch s.Mode[i] {
		case Rolling:
			sd.j[k], sd.w[k], sd.bottom[k], sd.foot[k], sd.kind[k] = g.jt, g.jt, -g.gt, i, 0
			if m.onBelt(g) {
				sd.bottom[k] -= s.belt.Accel // du/dt = −dv_b/dt
			}
			k++
			sd.j[k], sd.w[k], sd.bottom[k], sd.foot[k], sd.kind[k] = g.jn, g.jn, -g.gn, i, 1
			k++
		case Sliding:
			mu := m.terrain[g.sp.seg].muK * s.SlipDir[i]
			for j := 0; j < n; j++ {
				sd.w[k][j] = g.jn[j] - mu*g.jt[j]
			}
			sd.j[k], sd.bottom[k], sd.foot[k], sd.kind[k] = g.jn, -g.gn, i, 1
			k++
		}
	}
	sd.k = k
	m.kneeRows(s, &sd, nil)
	k = sd.k
	var lam [maxRows]float64
	ev.ok = m.solveSaddle(&tr, &f, &sd, &ev.acc, &lam)
	if !ev.ok {
		return
	}
	for r := 0; r < k; r++ {
		i := sd.foot[r]
		switch sd.kind[r] {
		case 0:
			ev.force[i][0] = lam[r]
		case rowKnee:
			// λ acts on the shank as a knee torque would: the stop holds
			// with λ < 0 (it pushes the shank back).
			ev.knee[i] = -lam[r]
		default:
			ev.force[i][1] = lam[r]
			if s.Mode[i] == Sliding {
				ev.force[i][0] = -m.terrain[ev.geom[i].sp.seg].muK * s.SlipDir[i] * lam[r]
			}
		}
	}
}

// contactRecord fills the public contact record of foot i from an
// evaluation.
func (m *Model) contactRecord(s *State, ev *eval, i int, fc *FootContact) {
	g := &ev.geom[i]
	ft, fn := ev.force[i][0], ev.force[i][1]
	mu := m.terrain[g.sp.seg].muS
	u, _ := m.surface(s, g, 0)
	*fc = FootContact{Mode: s.Mode[i], Normal: fn, Tangential: ft, Gap: g.gap,
		SlipVel: g.slip - u, Segment: g.sp.seg, Point: g.sp.p}
	fc.Utilization = utilization(ft, fn, mu)
	fc.KneeTorque = ev.knee[i]
	if s.Mode[i] != Free {
		fc.CoP = m.centreOfPressure(i, g)
	}
}

func utilization(ft, fn, mu float64) float64 {
	switch {
	case ft == 0:
		return 0
	case fn <= 0 || mu == 0:
		return math.Inf(1)
	}
	return math.Abs(ft) / (mu * fn)
}

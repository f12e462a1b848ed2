package plant

import "math"

// trig holds a(θ) and a⊥(θ) of every link at one configuration, so that an
// evaluation computes each sine and cosine once.
type trig struct {
	a, ap [MaxLinks][2]float64
}

func (m *Model) trigOf(q *[MaxDOF]float64, t *trig) {
	for k := 0; k < m.nLinks; k++ {
		sn, cs := math.Sincos(q[2+k])
		t.a[k] = [2]float64{sn, -cs}
		t.ap[k] = [2]float64{cs, sn}
	}
}

// rowKnee is the saddle row kind of a locked knee: J = W = e_shank −
// e_thigh, the knee angle's rate; foot is the leg.
const rowKnee = 2

// kneeRows appends a row for every locked knee of s to rows, with its
// position residual θ_shank − θ_thigh in res when res is not nil.
func (m *Model) kneeRows(s *State, rows *saddle, res *[maxRows]float64) {
	for i := 0; i < m.nFeet; i++ {
		j := m.kneeOf[i]
		if j < 0 || !s.KneeLocked[i] {
			continue
		}
		kn := &m.knees[j]
		k := rows.k
		rows.j[k] = [MaxDOF]float64{}
		rows.j[k][2+kn.shank], rows.j[k][2+kn.thigh] = 1, -1
		rows.w[k] = rows.j[k]
		rows.foot[k], rows.kind[k], rows.bottom[k], rows.goal[k] = i, rowKnee, 0, 0
		if res != nil {
			res[k] = s.Q[2+kn.shank] - s.Q[2+kn.thigh] - kn.stop
		}
		rows.k++
	}
}

// solveDense solves the saddle-point system of solveSaddle with the full
// mass matrix: a kneed walker's thigh and shank couple, so M is no longer
// an arrow. The links of a kneed walker are of comparable mass, so the
// dense system (at most 7 coordinates and 6 rows) is well conditioned
// after the row equilibration of kkt.solve.
func (m *Model) solveDense(tr *trig, f *[MaxDOF]float64, sd *saddle, x *[MaxDOF]float64, lam *[maxRows]float64) bool {
	var M [MaxDOF][MaxDOF]float64
	m.massTrig(tr, &M)
	n := m.n
	N := n + sd.k
	var sys kkt
	for i := 0; i < n; i++ {
		copy(sys.a[i][:n], M[i][:n])
		sys.b[i] = f[i]
	}
	for r := 0; r < sd.k; r++ {
		for i := 0; i < n; i++ {
			sys.a[i][n+r] = -sd.w[r][i]
			sys.a[n+r][i] = sd.j[r][i]
		}
		sys.b[n+r] = sd.bottom[r]
	}
	if !sys.solve(N) {
		return false
	}
	copy(x[:n], sys.b[:n])
	for r := 0; r < sd.k; r++ {
		lam[r] = sys.b[n+r]
	}
	return true
}

// saddle holds the constraint rows of one solve: J (the rows whose
// velocity or acceleration is prescribed), W (the directions their forces
// act along; W = J except for sliding feet and cone-boundary impulses), and
// the foot each row belongs to. Each foot's rows involve only x, y and that
// foot's leg angle.
type saddle struct {
	k      int
	j, w   [maxRows][MaxDOF]float64
	foot   [maxRows]int
	kind   [maxRows]int // 0 tangential, 1 normal, rowKnee a locked knee
	bottom [maxRows]float64
	// goal is the velocity J q̇ a row must reach in an impulse or velocity
	// projection: the belt's surface speed for the tangential row of a
	// foot on the belt, else 0.
	goal [maxRows]float64
}

// solveSaddle solves
//
//	M x − Wᵀ λ = f,   J x = bottom
//
// exploiting the arrow shape of M (links couple only through the hip): the
// angles of links without a contact row are eliminated first, x_k =
// (f_k − B_kᵀ x_hip)/D_k with B_k = m_k ρ_k a⊥_k and D_k = m_k ρ_k² + I_k,
// which changes the hip block by −B_k B_kᵀ/D_k (bounded by m_k, so a
// nearly massless link costs no accuracy). The remaining saddle-point
// system (hip, legs in contact, contact rows: at most 8 unknowns) is
// solved by Gaussian elimination with row equilibration and partial
// pivoting. It reports false if the system is singular.
func (m *Model) solveSaddle(tr *trig, f *[MaxDOF]float64, sd *saddle, x *[MaxDOF]float64, lam *[maxRows]float64) bool {
	if m.nKnees > 0 {
		return m.solveTree(tr, f, sd, x, lam)
	}
	return m.solveSaddleWith(tr, f, sd, x, lam, true)
}

// solveSaddleWith is solveSaddle; with oneFoot false it never takes the
// closed-form path (so tests can compare the two).
func (m *Model) solveSaddleWith(tr *trig, f *[MaxDOF]float64, sd *saddle, x *[MaxDOF]float64, lam *[maxRows]float64, oneFoot bool) bool {
	var inContact [MaxLinks]bool
	for r := 0; r < sd.k; r++ {
		inContact[sd.foot[r]] = true
	}
	var B [MaxLinks][2]float64
	var D [MaxLinks]float64
	// Unknown order: x_hip, y_hip, contact-link angles, then λ.
	var col [MaxLinks]int // position of a contact link's angle
	nu := 2
	for k := 0; k < m.nLinks; k++ {
		l := &m.links[k]
		B[k] = [2]float64{l.mr * tr.ap[k][0], l.mr * tr.ap[k][1]}
		D[k] = l.d
		if inContact[k] {
			col[k] = nu
			nu++
		}
	}
	N := nu + sd.k
	hxx, hxy, hyy := m.massTotal, 0.0, m.massTotal
	fx, fy := f[0], f[1]
	for k := 0; k < m.nLinks; k++ {
		if inContact[k] {
			continue
		}
		inv := 1 / D[k]
		hxx -= B[k][0] * B[k][0] * inv
		hxy -= B[k][0] * B[k][1] * inv
		hyy -= B[k][1] * B[k][1] * inv
		fx -= B[k][0] * f[2+k] * inv
		fy -= B[k][1] * f[2+k] * inv
	}
	if oneFoot && sd.k == 2 && sd.kind[0] == 0 && sd.kind[1] == 1 && sd.foot[0] == sd.foot[1] &&
		sd.j[0] == sd.w[0] && sd.j[1] == sd.w[1] {
		k := sd.foot[0]
		return m.solveOneFoot(k, sd.j[0][0], sd.j[0][1], sd.j[1][0], sd.j[1][1], sd.j[0][2+k], sd.j[1][2+k],
			sd.bottom[0], sd.bottom[1], &B, &D, f, hxx, hxy, hyy, fx, fy, x, lam)
	}
	// Declared after the closed-form return: zeroing it costs time.
	var sys kkt
	for i := 0; i < N; i++ {
		row := &sys.a[i]
		for j := 0; j < N; j++ {
			row[j] = 0
		}
	}
	for k := 0; k < m.nLinks; k++ {
		if inContact[k] {
			c := col[k]
			sys.a[0][c], sys.a[1][c] = B[k][0], B[k][1]
			sys.a[c][0], sys.a[c][1] = B[k][0], B[k][1]
			sys.a[c][c] = D[k]
			sys.b[c] = f[2+k]
		}
	}
	sys.a[0][0], sys.a[0][1], sys.a[1][0], sys.a[1][1] = hxx, hxy, hxy, hyy
	sys.b[0], sys.b[1] = fx, fy
	for r := 0; r < sd.k; r++ {
		c := nu + r
		lk := sd.foot[r]
		jc := col[lk]
		sys.a[0][c], sys.a[1][c] = -sd.w[r][0], -sd.w[r][1]
		sys.a[jc][c] = -sd.w[r][2+lk]
		sys.a[c][0], sys.a[c][1] = sd.j[r][0], sd.j[r][1]
		sys.a[c][jc] = sd.j[r][2+lk]
		sys.b[c] = sd.bottom[r]
	}
	if !sys.solve(N) {
		return false
	}
	x[0], x[1] = sys.b[0], sys.b[1]
	for k := 0; k < m.nLinks; k++ {
		if inContact[k] {
			x[2+k] = sys.b[col[k]]
		} else {
			x[2+k] = (f[2+k] - B[k][0]*x[0] - B[k][1]*x[1]) / D[k]
		}
	}
	for r := 0; r < sd.k; r++ {
		lam[r] = sys.b[nu+r]
	}
	return true
}

// solveOneFoot is solveSaddle for the common case of one rolling foot, in
// closed form. The two contact rows have the orthonormal hip parts t and n,
// so they fix the hip acceleration as a_h = c₀ − ℓ θ̈ (ℓ = t J_t,θ + n J_n,θ,
// c₀ = t b_t + n b_n), the contact force is the hip residual
// λ = [t n]ᵀ (H a_h + B θ̈ − F), and the leg angle obeys one scalar equation
// whose coefficient ℓᵀHℓ − 2 B·ℓ + D is the walker's inertia about the
// contact point: well conditioned however light the leg is.
func (m *Model) solveOneFoot(k int, tx, ty, nx, ny, jt, jn, bt, bn float64, B *[MaxLinks][2]float64, D *[MaxLinks]float64,
	f *[MaxDOF]float64, hxx, hxy, hyy, fx, fy float64, x *[MaxDOF]float64, lam *[maxRows]float64) bool {
	t := [2]float64{tx, ty}
	n := [2]float64{nx, ny}
	l := [2]float64{t[0]*jt + n[0]*jn, t[1]*jt + n[1]*jn}
	c0 := [2]float64{t[0]*bt + n[0]*bn, t[1]*bt + n[1]*bn}
	Hl := [2]float64{hxx*l[0] + hxy*l[1], hxy*l[0] + hyy*l[1]}
	Hc := [2]float64{hxx*c0[0] + hxy*c0[1], hxy*c0[0] + hyy*c0[1]}
	bk := B[k]
	alpha := l[0]*Hl[0] + l[1]*Hl[1] - 2*(bk[0]*l[0]+bk[1]*l[1]) + D[k]
	beta := f[2+k] - (bk[0]*c0[0] + bk[1]*c0[1]) + l[0]*(Hc[0]-fx) + l[1]*(Hc[1]-fy)
	if !(alpha > 0) {
		return false
	}
	th := beta / alpha
	ax, ay := c0[0]-l[0]*th, c0[1]-l[1]*th
	rx := hxx*ax + hxy*ay + bk[0]*th - fx
	ry := hxy*ax + hyy*ay + bk[1]*th - fy
	lam[0] = t[0]*rx + t[1]*ry
	lam[1] = n[0]*rx + n[1]*ry
	x[0], x[1] = ax, ay
	for j := 0; j < m.nLinks; j++ {
		if j == k {
			x[2+j] = th
		} else {
			x[2+j] = (f[2+j] - B[j][0]*ax - B[j][1]*ay) * m.links[j].invD
		}
	}
	return true
}

// rhsOneFoot is the hot path of rhs: foot k rolls and every other foot is
// free, so no saddle system is assembled at all.
//
// gt is the tangential row's J̇q̇ less the surface's tangential acceleration
// (g.gt on fixed ground).
func (m *Model) rhsOneFoot(tr *trig, f *[MaxDOF]float64, k int, g *footGeom, gt float64, x *[MaxDOF]float64, lam *[maxRows]float64) bool {
	var B [MaxLinks][2]float64
	var D [MaxLinks]float64
	hxx, hxy, hyy := m.massTotal, 0.0, m.massTotal
	fx, fy := f[0], f[1]
	for j := 0; j < m.nLinks; j++ {
		l := &m.links[j]
		B[j] = [2]float64{l.mr * tr.ap[j][0], l.mr * tr.ap[j][1]}
		D[j] = l.d
		if j == k {
			continue
		}
		inv := l.invD
		hxx -= B[j][0] * B[j][0] * inv
		hxy -= B[j][0] * B[j][1] * inv
		hyy -= B[j][1] * B[j][1] * inv
		fx -= B[j][0] * f[2+j] * inv
		fy -= B[j][1] * f[2+j] * inv
	}
	t, n := g.sp.t, g.sp.n
	return m.solveOneFoot(k, t[0], t[1], n[0], n[1], g.jt[2+k], g.jn[2+k], -gt, -g.gn, &B, &D, f, hxx, hxy, hyy, fx, fy, x, lam)
}

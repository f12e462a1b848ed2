package plant

// trig holds a(θ) and a⊥(θ) of every link at one configuration, so that an
// evaluation computes each sine and cosine once.
type trig struct {
	a, ap [MaxLinks][2]float64
}

func (m *Model) trigOf(q *[MaxDOF]float64, t *trig) {
	for k := 0; k < m.nLinks; k++ {
		t.a[k], t.ap[k] = axis(q[2+k])
	}
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
	kind   [maxRows]int // 0 tangential, 1 normal
	bottom [maxRows]float64
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
	var inContact [MaxLinks]bool
	for r := 0; r < sd.k; r++ {
		inContact[sd.foot[r]] = true
	}
	var B [MaxLinks][2]float64
	var D [MaxLinks]float64
	var sys kkt
	// Unknown order: x_hip, y_hip, contact-link angles, then λ.
	var col [MaxLinks]int // position of a contact link's angle
	nu := 2
	for k := 0; k < m.nLinks; k++ {
		l := &m.links[k]
		mr := l.mass * l.rho
		B[k] = [2]float64{mr * tr.ap[k][0], mr * tr.ap[k][1]}
		D[k] = mr*l.rho + l.inertia
		if inContact[k] {
			col[k] = nu
			nu++
		}
	}
	N := nu + sd.k
	for i := 0; i < N; i++ {
		row := &sys.a[i]
		for j := 0; j < N; j++ {
			row[j] = 0
		}
	}
	hxx, hxy, hyy := m.massTotal, 0.0, m.massTotal
	fx, fy := f[0], f[1]
	for k := 0; k < m.nLinks; k++ {
		if inContact[k] {
			c := col[k]
			sys.a[0][c], sys.a[1][c] = B[k][0], B[k][1]
			sys.a[c][0], sys.a[c][1] = B[k][0], B[k][1]
			sys.a[c][c] = D[k]
			sys.b[c] = f[2+k]
			continue
		}
		inv := 1 / D[k]
		hxx -= B[k][0] * B[k][0] * inv
		hxy -= B[k][0] * B[k][1] * inv
		hyy -= B[k][1] * B[k][1] * inv
		fx -= B[k][0] * f[2+k] * inv
		fy -= B[k][1] * f[2+k] * inv
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

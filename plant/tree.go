package plant

// treeGroup is one group of solveTree: a leg or the torso, reduced to one
// or two angles.
type treeGroup struct {
	nu     int           // reduced angles: 1 or 2
	link   [2]int        // the links; link[1] < 0 for a straight leg or the torso
	rigid  bool          // a locked knee: one angle moving both links
	kb     float64       // a locked knee's prescribed x_shank − x_thigh (its row's bottom)
	b      [2][2]float64 // B_u: hip coupling of each reduced angle
	d      [2][2]float64 // D_uv
	fu     [2]float64    // f_u
	inv    [2][2]float64 // D⁻¹ of an eliminated group
	col    [2]int        // position of each reduced angle among the unknowns
	active bool          // has a contact row
}

// rowU is a row's (J or W) entry along reduced angle u of group g.
func rowU(v *[MaxDOF]float64, g *treeGroup, u int) float64 {
	if g.rigid {
		return v[2+g.link[0]] + v[2+g.link[1]]
	}
	return v[2+g.link[u]]
}

// solveTree is solveSaddle for a walker with knees: the arrow elimination
// generalized to groups of links. A group is a leg (its thigh and shank, or
// its one straight link) or the torso; groups couple only through the hip,
// as single links do without knees. A locked knee makes its leg one rigid
// body, so the group has one reduced angle u (x_thigh = u, x_shank = u +
// the knee row's prescribed value, 0 in the dynamics) and the knee's row
// leaves the system; an unlocked knee leaves two angles. Groups without a
// contact row are eliminated through their 1×1 or 2×2 block; one rolling
// foot on a one-angle leg has the closed form of solveOneFoot; anything
// else (hip, reduced angles of legs in contact, contact rows: at most 10
// unknowns) is solved by kkt.solve. Each locked knee's force is read back
// from its shank's row of M q̈ − Wᵀλ = f. It gives solveDense's answer
// (tree_test.go) at a fraction of the work.
func (m *Model) solveTree(tr *trig, f *[MaxDOF]float64, sd *saddle, x *[MaxDOF]float64, lam *[maxRows]float64) bool {
	var gs [3]treeGroup
	var locked [2]bool
	var kb [2]float64
	for r := 0; r < sd.k; r++ {
		if sd.kind[r] == rowKnee {
			locked[sd.foot[r]] = true
			kb[sd.foot[r]] = sd.bottom[r]
		} else {
			gs[sd.foot[r]].active = true
		}
	}
	ng := 0
	for i := 0; i < m.nFeet; i++ {
		gs[i].link = [2]int{i, -1}
		if fl := m.feet[i].link; fl != i {
			gs[i].link[1] = fl
		}
		ng++
	}
	if m.torso >= 0 {
		gs[ng].link = [2]int{m.torso, -1}
		ng++
	}
	var hipShift [2]float64 // B_shank·kb of the locked knees
	for gi := 0; gi < ng; gi++ {
		g := &gs[gi]
		t := g.link[0]
		bt := [2]float64{m.links[t].mr * tr.ap[t][0], m.links[t].mr * tr.ap[t][1]}
		if g.link[1] < 0 {
			g.nu = 1
			g.b[0] = bt
			g.d[0][0] = m.links[t].d
			g.fu[0] = f[2+t]
			continue
		}
		s := g.link[1]
		bs := [2]float64{m.links[s].mr * tr.ap[s][0], m.links[s].mr * tr.ap[s][1]}
		cs, _ := kneeTrig(tr, &m.knees[m.kneeOf[gi]])
		c := m.knees[m.kneeOf[gi]].coupling * cs
		if locked[gi] {
			// M's shank column times kb moves to the right side.
			g.nu, g.rigid, g.kb = 1, true, kb[gi]
			g.b[0] = [2]float64{bt[0] + bs[0], bt[1] + bs[1]}
			g.d[0][0] = m.links[t].d + m.links[s].d + 2*c
			g.fu[0] = f[2+t] + f[2+s] - (c+m.links[s].d)*g.kb
			hipShift[0] += bs[0] * g.kb
			hipShift[1] += bs[1] * g.kb
			continue
		}
		g.nu = 2
		g.b[0], g.b[1] = bt, bs
		g.d = [2][2]float64{{m.links[t].d, c}, {c, m.links[s].d}}
		g.fu = [2]float64{f[2+t], f[2+s]}
	}
	hxx, hxy, hyy := m.massTotal, 0.0, m.massTotal
	fx, fy := f[0]-hipShift[0], f[1]-hipShift[1]
	nu := 2
	for gi := 0; gi < ng; gi++ {
		g := &gs[gi]
		if g.active {
			for u := 0; u < g.nu; u++ {
				g.col[u] = nu
				nu++
			}
			continue
		}
		di := &g.inv
		if g.nu == 1 {
			di[0][0] = 1 / g.d[0][0]
		} else {
			det := g.d[0][0]*g.d[1][1] - g.d[0][1]*g.d[1][0]
			if !(det > 0) {
				return false
			}
			di[0][0], di[1][1] = g.d[1][1]/det, g.d[0][0]/det
			di[0][1], di[1][0] = -g.d[0][1]/det, -g.d[1][0]/det
		}
		// H −= B D⁻¹ Bᵀ, F −= B D⁻¹ f_g.
		for u := 0; u < g.nu; u++ {
			for w := 0; w < g.nu; w++ {
				k := di[u][w]
				hxx -= g.b[u][0] * k * g.b[w][0]
				hxy -= g.b[u][0] * k * g.b[w][1]
				hyy -= g.b[u][1] * k * g.b[w][1]
				fx -= g.b[u][0] * k * g.fu[w]
				fy -= g.b[u][1] * k * g.fu[w]
			}
		}
	}
	var rowCol [maxRows]int // position of each contact row's λ, −1 for a knee row
	N := nu
	for r := 0; r < sd.k; r++ {
		rowCol[r] = -1
		if sd.kind[r] != rowKnee {
			rowCol[r] = N
			N++
		}
	}
	var ax, ay float64
	var ua [3][2]float64 // reduced accelerations of the active groups
	if N != 5 || nu != 3 || !treeOneFoot(sd, &gs, ng, &rowCol, hxx, hxy, hyy, fx, fy, &ax, &ay, &ua, lam) {
		if !treeKKT(sd, &gs, ng, &rowCol, N, hxx, hxy, hyy, fx, fy, &ax, &ay, &ua, lam) {
			return false
		}
	}
	m.finishTree(tr, f, sd, &gs, ng, &rowCol, ax, ay, &ua, x, lam)
	return true
}

// treeOneFoot is the closed form of solveOneFoot for one rolling foot (two
// rows with W = J, tangential then normal) on the only active group, a
// one-angle leg. It reports false when the rows are not of that shape.
func treeOneFoot(sd *saddle, gs *[3]treeGroup, ng int, rowCol *[maxRows]int, hxx, hxy, hyy, fx, fy float64,
	ax, ay *float64, ua *[3][2]float64, lam *[maxRows]float64) bool {
	rt, rn := -1, -1
	for r := 0; r < sd.k; r++ {
		switch {
		case rowCol[r] < 0:
		case sd.kind[r] == 0 && rt < 0:
			rt = r
		case sd.kind[r] == 1 && rn < 0:
			rn = r
		default:
			return false
		}
	}
	if rt < 0 || rn < 0 || sd.foot[rt] != sd.foot[rn] || sd.j[rt] != sd.w[rt] || sd.j[rn] != sd.w[rn] {
		return false
	}
	gi := sd.foot[rt]
	g := &gs[gi]
	t := [2]float64{sd.j[rt][0], sd.j[rt][1]}
	n := [2]float64{sd.j[rn][0], sd.j[rn][1]}
	jt, jn := rowU(&sd.j[rt], g, 0), rowU(&sd.j[rn], g, 0)
	bt, bn := sd.bottom[rt], sd.bottom[rn]
	if g.rigid {
		bt -= sd.j[rt][2+g.link[1]] * g.kb
		bn -= sd.j[rn][2+g.link[1]] * g.kb
	}
	l := [2]float64{t[0]*jt + n[0]*jn, t[1]*jt + n[1]*jn}
	c0 := [2]float64{t[0]*bt + n[0]*bn, t[1]*bt + n[1]*bn}
	Hl := [2]float64{hxx*l[0] + hxy*l[1], hxy*l[0] + hyy*l[1]}
	Hc := [2]float64{hxx*c0[0] + hxy*c0[1], hxy*c0[0] + hyy*c0[1]}
	b := g.b[0]
	alpha := l[0]*Hl[0] + l[1]*Hl[1] - 2*(b[0]*l[0]+b[1]*l[1]) + g.d[0][0]
	beta := g.fu[0] - (b[0]*c0[0] + b[1]*c0[1]) + l[0]*(Hc[0]-fx) + l[1]*(Hc[1]-fy)
	if !(alpha > 0) {
		return false
	}
	u := beta / alpha
	*ax, *ay = c0[0]-l[0]*u, c0[1]-l[1]*u
	rx := hxx**ax + hxy**ay + b[0]*u - fx
	ry := hxy**ax + hyy**ay + b[1]*u - fy
	lam[rt] = t[0]*rx + t[1]*ry
	lam[rn] = n[0]*rx + n[1]*ry
	ua[gi][0] = u
	return true
}

// treeKKT solves the reduced saddle-point system of solveTree by Gaussian
// elimination.
func treeKKT(sd *saddle, gs *[3]treeGroup, ng int, rowCol *[maxRows]int, N int, hxx, hxy, hyy, fx, fy float64,
	ax, ay *float64, ua *[3][2]float64, lam *[maxRows]float64) bool {
	var sys kkt
	for i := 0; i < N; i++ {
		row := &sys.a[i]
		for j := 0; j < N; j++ {
			row[j] = 0
		}
	}
	sys.a[0][0], sys.a[0][1], sys.a[1][0], sys.a[1][1] = hxx, hxy, hxy, hyy
	sys.b[0], sys.b[1] = fx, fy
	for gi := 0; gi < ng; gi++ {
		g := &gs[gi]
		if !g.active {
			continue
		}
		for u := 0; u < g.nu; u++ {
			c := g.col[u]
			sys.a[0][c], sys.a[1][c] = g.b[u][0], g.b[u][1]
			sys.a[c][0], sys.a[c][1] = g.b[u][0], g.b[u][1]
			for w := 0; w < g.nu; w++ {
				sys.a[c][g.col[w]] = g.d[u][w]
			}
			sys.b[c] = g.fu[u]
		}
	}
	for r := 0; r < sd.k; r++ {
		c := rowCol[r]
		if c < 0 {
			continue
		}
		g := &gs[sd.foot[r]]
		sys.a[0][c], sys.a[1][c] = -sd.w[r][0], -sd.w[r][1]
		sys.a[c][0], sys.a[c][1] = sd.j[r][0], sd.j[r][1]
		for u := 0; u < g.nu; u++ {
			sys.a[g.col[u]][c] = -rowU(&sd.w[r], g, u)
			sys.a[c][g.col[u]] = rowU(&sd.j[r], g, u)
		}
		sys.b[c] = sd.bottom[r]
		if g.rigid {
			sys.b[c] -= sd.j[r][2+g.link[1]] * g.kb
		}
	}
	if !sys.solve(N) {
		return false
	}
	*ax, *ay = sys.b[0], sys.b[1]
	for gi := 0; gi < ng; gi++ {
		g := &gs[gi]
		if g.active {
			for u := 0; u < g.nu; u++ {
				ua[gi][u] = sys.b[g.col[u]]
			}
		}
	}
	for r := 0; r < sd.k; r++ {
		if rowCol[r] >= 0 {
			lam[r] = sys.b[rowCol[r]]
		}
	}
	return true
}

// finishTree fills q̈ from the hip acceleration and the active groups'
// reduced accelerations, solves the eliminated groups, and reads each
// locked knee's force from its shank's row: λ_k = M_s q̈ − f_s −
// Σ_contact W_r,s λ_r (the knee's own row has W_s = 1).
func (m *Model) finishTree(tr *trig, f *[MaxDOF]float64, sd *saddle, gs *[3]treeGroup, ng int, rowCol *[maxRows]int,
	ax, ay float64, ua *[3][2]float64, x *[MaxDOF]float64, lam *[maxRows]float64) {
	x[0], x[1] = ax, ay
	for gi := 0; gi < ng; gi++ {
		g := &gs[gi]
		uu := ua[gi]
		if !g.active {
			var rhs [2]float64
			for u := 0; u < g.nu; u++ {
				rhs[u] = g.fu[u] - g.b[u][0]*ax - g.b[u][1]*ay
			}
			uu = [2]float64{}
			for u := 0; u < g.nu; u++ {
				for w := 0; w < g.nu; w++ {
					uu[u] += g.inv[u][w] * rhs[w]
				}
			}
		}
		switch {
		case g.rigid:
			x[2+g.link[0]], x[2+g.link[1]] = uu[0], uu[0]+g.kb
		case g.nu == 2:
			x[2+g.link[0]], x[2+g.link[1]] = uu[0], uu[1]
		default:
			x[2+g.link[0]] = uu[0]
		}
	}
	for r := 0; r < sd.k; r++ {
		if sd.kind[r] != rowKnee {
			continue
		}
		kn := &m.knees[m.kneeOf[sd.foot[r]]]
		t, s := kn.thigh, kn.shank
		cs, _ := kneeTrig(tr, kn)
		l := m.links[s].mr*(tr.ap[s][0]*ax+tr.ap[s][1]*ay) + kn.coupling*cs*x[2+t] + m.links[s].d*x[2+s] - f[2+s]
		for q := 0; q < sd.k; q++ {
			if rowCol[q] >= 0 {
				l -= sd.w[q][2+s] * lam[q]
			}
		}
		lam[r] = l
	}
}

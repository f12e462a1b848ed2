package plant

// solveTree is solveSaddle for a walker with knees: the arrow elimination
// generalized to groups of links. A group is a leg (its thigh and shank, or
// its one straight link) or the torso; groups couple only through the hip,
// as single links do without knees. A locked knee makes its leg one rigid
// body (θ̈_shank = θ̈_thigh), so the group has one reduced angle u with
// direction e_thigh + e_shank and the knee's row leaves the system; an
// unlocked knee leaves two, e_thigh and e_shank. Groups without a contact
// row are eliminated through their 1×1 or 2×2 block, the rest (hip,
// reduced angles of legs in contact, contact rows: at most 10 unknowns,
// usually 5) is solved by kkt.solve, and each locked knee's force is read
// back from its shank's row of M q̈ − Wᵀλ = f. It gives solveDense's
// answer (tree_test.go) at a fraction of the work.
func (m *Model) solveTree(tr *trig, f *[MaxDOF]float64, sd *saddle, x *[MaxDOF]float64, lam *[maxRows]float64) bool {
	type group struct {
		nu     int           // reduced angles: 1 or 2
		link   [2]int        // the links; link[1] < 0 for a straight leg or the torso
		rigid  bool          // a locked knee: one angle moving both links
		kb     float64       // a locked knee's prescribed x_shank − x_thigh (its row's bottom)
		b      [2][2]float64 // B_u: hip coupling of each reduced angle
		d      [2][2]float64 // D_uv
		fu     [2]float64    // f_u
		col    [2]int        // position of each reduced angle among the unknowns, −1 eliminated
		active bool          // has a contact row
	}
	var gs [3]group
	var hipShift [2]float64 // B_shank·kb of the locked knees
	ng := 0
	var locked [2]bool
	var kb [2]float64
	for r := 0; r < sd.k; r++ {
		if sd.kind[r] == rowKnee {
			locked[sd.foot[r]] = true
			kb[sd.foot[r]] = sd.bottom[r]
		}
	}
	for r := 0; r < sd.k; r++ {
		if sd.kind[r] != rowKnee {
			gs[sd.foot[r]].active = true
		}
	}
	for i := 0; i < m.nFeet; i++ {
		g := &gs[i]
		g.link = [2]int{i, -1}
		if fl := m.feet[i].link; fl != i {
			g.link[1] = fl
		}
		ng++
	}
	if m.torso >= 0 {
		gs[ng].link = [2]int{m.torso, -1}
		ng++
	}
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
			// x_thigh = u, x_shank = u + kb: the row's bottom kb is 0 in
			// the dynamics and the closing rate's negative in a knee
			// strike; M's shank column times kb moves to the right side.
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
	// rowU is row r's (J or W) entry along reduced angle u of group g.
	rowU := func(v *[MaxDOF]float64, g *group, u int) float64 {
		if g.rigid {
			return v[2+g.link[0]] + v[2+g.link[1]]
		}
		return v[2+g.link[u]]
	}
	hxx, hxy, hyy := m.massTotal, 0.0, m.massTotal
	fx, fy := f[0]-hipShift[0], f[1]-hipShift[1]
	var inv [3][2][2]float64 // D⁻¹ of eliminated groups
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
		g.col = [2]int{-1, -1}
		di := &inv[gi]
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
	ax, ay := sys.b[0], sys.b[1]
	x[0], x[1] = ax, ay
	for gi := 0; gi < ng; gi++ {
		g := &gs[gi]
		var uu [2]float64
		if g.active {
			for u := 0; u < g.nu; u++ {
				uu[u] = sys.b[g.col[u]]
			}
		} else {
			var rhs [2]float64
			for u := 0; u < g.nu; u++ {
				rhs[u] = g.fu[u] - g.b[u][0]*ax - g.b[u][1]*ay
			}
			for u := 0; u < g.nu; u++ {
				for w := 0; w < g.nu; w++ {
					uu[u] += inv[gi][u][w] * rhs[w]
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
		if rowCol[r] >= 0 {
			lam[r] = sys.b[rowCol[r]]
		}
	}
	// A locked knee's force from its shank's row: λ_k = M_s q̈ − f_s −
	// Σ_contact W_r,s λ_r (its own row has W_s = 1).
	for r := 0; r < sd.k; r++ {
		if sd.kind[r] != rowKnee {
			continue
		}
		i := sd.foot[r]
		kn := &m.knees[m.kneeOf[i]]
		t, s := kn.thigh, kn.shank
		cs, _ := kneeTrig(tr, kn)
		ms := m.links[s].mr*(tr.ap[s][0]*ax+tr.ap[s][1]*ay) + kn.coupling*cs*x[2+t] + m.links[s].d*x[2+s]
		l := ms - f[2+s]
		for q := 0; q < sd.k; q++ {
			if rowCol[q] >= 0 {
				l -= sd.w[q][2+s] * lam[q]
			}
		}
		lam[r] = l
	}
	return true
}

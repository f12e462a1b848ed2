package plant

import "math"

// link is one rigid body of the tree. Its centre of mass sits at
// joint + rho·a(θ) with a(θ) = (sin θ, −cos θ), joint its proximal joint
// (the hip, or the knee for a shank): rho = +COMDist for a leg, thigh or
// shank (axis pointing down the leg), −COMDist for the torso (axis from
// the hip up).
//
// mr and d are the link's composite first and second moments about its
// proximal joint (see the package documentation, "Model"): its own m·ρ and
// m·ρ² + I, plus, for a thigh, the shank's mass placed at the knee (m_s·ℓ
// and m_s·ℓ²). For links without a child they are the link's own moments.
type link struct {
	mass, rho   float64
	mr, d, invD float64 // composite moments and 1/d, precomputed for the hot loop
}

func newLink(mass, rho, inertia float64) link {
	d := mass*rho*rho + inertia
	return link{mass: mass, rho: rho, mr: mass * rho, d: d, invD: 1 / d}
}

// addChild adds a child body of the given mass hinged at distance length
// along the link's axis to the composite moments.
func (l *link) addChild(mass, length float64) {
	l.mr += mass * length
	l.d += mass * length * length
	l.invD = 1 / l.d
}

// foot is the arc geometry of one leg: arc centre at knee + (L−R)·a(θ) +
// d·a⊥(θ), a⊥(θ) = (cos θ, sin θ), with θ the angle of the foot's link
// and knee = hip for a straight leg.
type foot struct {
	length, radius, offset float64
	link                   int     // index of the link the foot is fixed to
	thigh                  float64 // thigh length (hip to knee) of a kneed leg, 0 for a straight leg
}

// knee is the joint between the thigh (link thigh, the leg's index) and
// the shank of one leg.
type knee struct {
	thigh, shank int
	// coupling is m_shank·ρ_shank·ℓ_thigh: the thigh–shank entry of M is
	// coupling·cos(θ_thigh − θ_shank).
	coupling float64
	actuated bool
	stop     float64 // Shank.StopAngle: θ_shank − θ_thigh at the stop
}

// Model is a walker ready to simulate: validated parameters, compiled
// terrain and the chosen options. It is read-only after New.
type Model struct {
	p          Params
	o          Options
	nLinks     int // links: legs first, then the torso
	nFeet      int // 2, or 1 with Params.OneLeg
	n          int // degrees of freedom, 2 + nLinks
	nAct       int
	nHip       int // hip actuators: 1 (compass), 2 (torso) or 0 (one leg)
	torso      int // link index of the torso, −1 if none
	links      [MaxLinks]link
	feet       [2]foot
	knees      [2]knee // the knees, in leg order, of the legs that have one
	nKnees     int
	kneeOf     [2]int // index into knees of leg i's knee, −1 for a straight leg
	massTotal  float64
	terrain    []tseg
	jointNames []string
	reach      float64 // longest leg
	minStride  float64
	fallHip    float64 // < 0: disabled
	fallTorso  float64 // < 0: disabled
}

// New validates the parameters and options and builds a Model.
func New(p Params, o Options) (*Model, error) {
	if err := p.Validate(); err != nil {
		return nil, err
	}
	if err := o.validate(); err != nil {
		return nil, err
	}
	m := &Model{p: p, o: o, torso: -1}
	m.p.Terrain.Segments = append([]Segment(nil), p.Terrain.Segments...)
	if p.Torso != nil && !p.OneLeg {
		t := *p.Torso
		m.p.Torso = &t
	} else {
		m.p.Torso = nil
	}
	for i := range m.p.Legs {
		if sh := m.p.Legs[i].Shank; sh != nil {
			c := *sh
			m.p.Legs[i].Shank = &c
		}
	}
	m.nFeet = 2
	if p.OneLeg {
		m.nFeet = 1
	}
	m.massTotal = p.HipMass
	meanLen := 0.0
	for i := 0; i < m.nFeet; i++ {
		l := p.Legs[i]
		m.links[i] = newLink(l.Mass, l.COMDist, l.Inertia)
		m.feet[i] = foot{length: l.Length, radius: l.FootRadius, offset: l.ArcOffset, link: i}
		m.massTotal += l.Mass
		legLen := l.Length
		if l.Shank != nil {
			legLen += l.Shank.Length
		}
		m.reach = math.Max(m.reach, legLen+math.Abs(l.ArcOffset))
		meanLen += legLen / float64(m.nFeet)
	}
	m.nLinks = m.nFeet
	switch {
	case p.OneLeg:
		m.nAct = 0
	case m.p.Torso != nil:
		m.torso = m.nLinks
		t := m.p.Torso
		m.links[m.torso] = newLink(t.Mass, -t.COMDist, t.Inertia)
		m.massTotal += t.Mass
		m.nLinks++
		m.nAct = 2
		m.jointNames = []string{"hip_left", "hip_right"}
	default:
		m.nAct = 1
		m.jointNames = []string{"hip"}
	}
	m.nHip = m.nAct
	// Shanks come after the legs and the torso, so that q keeps its layout
	// (x, y, θ_left, θ_right[, θ_torso]) and a kneed walker only appends
	// (θ_shank_left, θ_shank_right).
	m.kneeOf = [2]int{-1, -1}
	names := [2]string{"knee_left", "knee_right"}
	for i := 0; i < m.nFeet; i++ {
		sh := m.p.Legs[i].Shank
		if sh == nil {
			continue
		}
		k := m.nLinks
		m.nLinks++
		m.links[k] = newLink(sh.Mass, sh.COMDist, sh.Inertia)
		m.links[i].addChild(sh.Mass, p.Legs[i].Length)
		m.massTotal += sh.Mass
		m.feet[i].length = sh.Length
		m.feet[i].link = k
		m.feet[i].thigh = p.Legs[i].Length
		kn := knee{thigh: i, shank: k, coupling: sh.Mass * sh.COMDist * p.Legs[i].Length, actuated: sh.Actuated && !p.OneLeg, stop: sh.StopAngle}
		m.kneeOf[i] = m.nKnees
		m.knees[m.nKnees] = kn
		m.nKnees++
		if kn.actuated {
			m.nAct++
			m.jointNames = append(m.jointNames, names[i])
		}
	}
	m.n = 2 + m.nLinks
	m.terrain = compileTerrain(m.p.Terrain)
	if m.o.SubSteps == 0 {
		m.o.SubSteps = DefaultSubSteps
	}
	m.minStride = o.MinStride
	if m.minStride == 0 {
		m.minStride = 0.1 * meanLen
	}
	m.fallHip = o.FallHipHeight
	if m.fallHip == 0 {
		short := m.feet[0].length + m.feet[0].thigh
		if m.nFeet == 2 {
			short = math.Min(short, m.feet[1].length+m.feet[1].thigh)
		}
		m.fallHip = 0.5 * short
	}
	m.fallTorso = o.FallTorsoAngle
	if m.fallTorso == 0 {
		m.fallTorso = DefaultFallTorsoAngle
	}
	if m.torso < 0 {
		m.fallTorso = -1
	}
	return m, nil
}

// Params returns a copy of the model's parameters.
func (m *Model) Params() Params {
	p := m.p
	p.Terrain.Segments = append([]Segment(nil), m.p.Terrain.Segments...)
	if m.p.Torso != nil {
		t := *m.p.Torso
		p.Torso = &t
	}
	for i := range p.Legs {
		if sh := p.Legs[i].Shank; sh != nil {
			c := *sh
			p.Legs[i].Shank = &c
		}
	}
	return p
}

// Options returns the options with defaults filled in.
func (m *Model) Options() Options {
	o := m.o
	o.MinStride = m.minStride
	o.FallHipHeight = m.fallHip
	o.FallTorsoAngle = m.fallTorso
	return o
}

// NumDOF is the number of generalized coordinates, 2 + number of links.
func (m *Model) NumDOF() int { return m.n }

// NumLinks is the number of rigid links (legs or thighs, then the torso,
// then the shanks).
func (m *Model) NumLinks() int { return m.nLinks }

// NumFeet is 2, or 1 for a Params.OneLeg model.
func (m *Model) NumFeet() int { return m.nFeet }

// NumActuators is the number of joint torques Input.Torque carries.
func (m *Model) NumActuators() int { return m.nAct }

// NumKnees is the number of legs with a knee (a Leg.Shank).
func (m *Model) NumKnees() int { return m.nKnees }

// HasTorso reports whether the walker has a torso link.
func (m *Model) HasTorso() bool { return m.torso >= 0 }

// JointNames returns the actuated joints in the order of Input.Torque and
// of JointState: "hip" for a compass walker, "hip_left", "hip_right" with
// a torso, then "knee_left", "knee_right" for the legs whose knee is
// actuated. The caller may keep the slice but must not change it.
func (m *Model) JointNames() []string { return m.jointNames }

// axis returns a(θ) = (sin θ, −cos θ) and a⊥(θ) = (cos θ, sin θ).
func axis(th float64) (a, ap [2]float64) {
	s, c := math.Sincos(th)
	return [2]float64{s, -c}, [2]float64{c, s}
}

// footCentre returns the arc centre of foot i, its derivative with respect
// to the angle of the foot's link, and its second derivative (for velocity
// products). For a kneed leg the knee's position (hip + ℓ a(θ_thigh))
// replaces the hip; its derivatives with respect to θ_thigh are in
// footGeometryTrig.
func (m *Model) footCentre(q *[MaxDOF]float64, i int) (c, dc, ddc [2]float64) {
	f := &m.feet[i]
	a, ap := axis(q[2+f.link])
	k := f.length - f.radius
	base := [2]float64{q[0], q[1]}
	if f.thigh != 0 {
		at, _ := axis(q[2+i])
		base[0] += f.thigh * at[0]
		base[1] += f.thigh * at[1]
	}
	c = [2]float64{base[0] + k*a[0] + f.offset*ap[0], base[1] + k*a[1] + f.offset*ap[1]}
	dc = [2]float64{k*ap[0] - f.offset*a[0], k*ap[1] - f.offset*a[1]}
	ddc = [2]float64{-k*a[0] - f.offset*ap[0], -k*a[1] - f.offset*ap[1]}
	return
}

// kneeTrig returns cos(θ_thigh − θ_shank) and sin(θ_thigh − θ_shank) of
// knee kn from the link trigonometry.
func kneeTrig(tr *trig, kn *knee) (cs, sn float64) {
	at, apt := &tr.a[kn.thigh], &tr.ap[kn.thigh]
	as, aps := &tr.a[kn.shank], &tr.ap[kn.shank]
	cs = apt[0]*aps[0] + apt[1]*aps[1]
	sn = at[0]*aps[0] - apt[0]*as[0]
	return
}

// biasTrig subtracts h(q, q̇) from f (the same terms as massBias).
func (m *Model) biasTrig(tr *trig, v *[MaxDOF]float64, f *[MaxDOF]float64) {
	g := m.p.Gravity
	f[1] -= m.massTotal * g
	for i := 0; i < m.nLinks; i++ {
		l := &m.links[i]
		k := 2 + i
		mr := l.mr
		w2 := v[k] * v[k]
		f[0] += mr * tr.a[i][0] * w2
		f[1] += mr * tr.a[i][1] * w2
		f[k] -= mr * g * tr.ap[i][1]
	}
	for j := 0; j < m.nKnees; j++ {
		kn := &m.knees[j]
		_, sn := kneeTrig(tr, kn)
		t, s := 2+kn.thigh, 2+kn.shank
		f[t] -= kn.coupling * sn * v[s] * v[s]
		f[s] += kn.coupling * sn * v[t] * v[t]
	}
}

// massBias fills the mass matrix M(q) and the bias h(q, q̇) (velocity
// products and gravity). With absolute angles the links couple through the
// hip and, for a kneed leg, thigh with shank; without knees M has an arrow
// shape.
func (m *Model) massBias(q, v *[MaxDOF]float64, M *[MaxDOF][MaxDOF]float64, h *[MaxDOF]float64) {
	n := m.n
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			M[i][j] = 0
		}
		h[i] = 0
	}
	g := m.p.Gravity
	M[0][0], M[1][1] = m.massTotal, m.massTotal
	h[1] = m.massTotal * g
	for i := 0; i < m.nLinks; i++ {
		l := &m.links[i]
		k := 2 + i
		a, ap := axis(q[k])
		mr := l.mr
		M[0][k], M[1][k] = mr*ap[0], mr*ap[1]
		M[k][0], M[k][1] = M[0][k], M[1][k]
		M[k][k] = l.d
		w2 := v[k] * v[k]
		h[0] -= mr * a[0] * w2
		h[1] -= mr * a[1] * w2
		h[k] = mr * g * ap[1]
	}
	if m.nKnees > 0 {
		var tr trig
		m.trigOf(q, &tr)
		for j := 0; j < m.nKnees; j++ {
			kn := &m.knees[j]
			cs, sn := kneeTrig(&tr, kn)
			t, s := 2+kn.thigh, 2+kn.shank
			M[t][s] = kn.coupling * cs
			M[s][t] = M[t][s]
			h[t] += kn.coupling * sn * v[s] * v[s]
			h[s] -= kn.coupling * sn * v[t] * v[t]
		}
	}
}

// massTrig fills the mass matrix from the link trigonometry (the dense
// solve of a kneed walker).
func (m *Model) massTrig(tr *trig, M *[MaxDOF][MaxDOF]float64) {
	n := m.n
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			M[i][j] = 0
		}
	}
	M[0][0], M[1][1] = m.massTotal, m.massTotal
	for i := 0; i < m.nLinks; i++ {
		l := &m.links[i]
		k := 2 + i
		M[0][k], M[1][k] = l.mr*tr.ap[i][0], l.mr*tr.ap[i][1]
		M[k][0], M[k][1] = M[0][k], M[1][k]
		M[k][k] = l.d
	}
	for j := 0; j < m.nKnees; j++ {
		kn := &m.knees[j]
		cs, _ := kneeTrig(tr, kn)
		t, s := 2+kn.thigh, 2+kn.shank
		M[t][s] = kn.coupling * cs
		M[s][t] = M[t][s]
	}
}

// generalizedInput adds B τ and the hip push to Q.
func (m *Model) generalizedInput(in *Input, Q *[MaxDOF]float64) {
	if in == nil {
		return
	}
	Q[0] += in.HipForce[0]
	Q[1] += in.HipForce[1]
	switch {
	case m.nHip == 1:
		Q[2] -= in.Torque[0]
		Q[3] += in.Torque[0]
	case m.nHip == 2:
		for j := 0; j < 2; j++ {
			Q[2+j] += in.Torque[j]
			Q[2+m.torso] -= in.Torque[j]
		}
	}
	// A knee torque acts on the shank and, reacting, on the thigh: positive
	// extends the knee (raises θ_shank − θ_thigh).
	a := m.nHip
	for j := 0; j < m.nKnees; j++ {
		kn := &m.knees[j]
		if !kn.actuated {
			continue
		}
		Q[2+kn.shank] += in.Torque[a]
		Q[2+kn.thigh] -= in.Torque[a]
		a++
	}
}

// InputMatrix returns column j of B: the generalized force of a unit torque
// on actuator j.
func (m *Model) InputMatrix(j int) [MaxDOF]float64 {
	var in Input
	var Q [MaxDOF]float64
	if j >= 0 && j < m.nAct {
		in.Torque[j] = 1
		m.generalizedInput(&in, &Q)
	}
	return Q
}

// MassMatrix fills M(q) for the first NumDOF rows and columns.
func (m *Model) MassMatrix(q *[MaxDOF]float64, M *[MaxDOF][MaxDOF]float64) {
	var v, h [MaxDOF]float64
	m.massBias(q, &v, M, &h)
}

// Bias fills h(q, q̇): velocity-product and gravity terms, so that
// M q̈ + h = generalized forces.
func (m *Model) Bias(q, v *[MaxDOF]float64, h *[MaxDOF]float64) {
	var M [MaxDOF][MaxDOF]float64
	m.massBias(q, v, &M, h)
}

package plant

import "math"

// link is one rigid body hanging from the hip. Its centre of mass sits at
// hip + rho·a(θ) with a(θ) = (sin θ, −cos θ): rho = +COMDist for a leg
// (axis from hip to foot), −COMDist for the torso (axis from hip up).
type link struct {
	mass, rho   float64
	mr, d, invD float64 // m·ρ, m·ρ² + I and its inverse, precomputed for the hot loop
}

func newLink(mass, rho, inertia float64) link {
	d := mass*rho*rho + inertia
	return link{mass: mass, rho: rho, mr: mass * rho, d: d, invD: 1 / d}
}

// foot is the arc geometry of one leg: arc centre at hip + (L−R)·a(θ) +
// d·a⊥(θ), a⊥(θ) = (cos θ, sin θ).
type foot struct {
	length, radius, offset float64
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
	torso      int // link index of the torso, −1 if none
	links      [MaxLinks]link
	feet       [2]foot
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
	m.nFeet = 2
	if p.OneLeg {
		m.nFeet = 1
	}
	m.massTotal = p.HipMass
	meanLen := 0.0
	for i := 0; i < m.nFeet; i++ {
		l := p.Legs[i]
		m.links[i] = newLink(l.Mass, l.COMDist, l.Inertia)
		m.feet[i] = foot{length: l.Length, radius: l.FootRadius, offset: l.ArcOffset}
		m.massTotal += l.Mass
		m.reach = math.Max(m.reach, l.Length+math.Abs(l.ArcOffset))
		meanLen += l.Length / float64(m.nFeet)
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
		short := p.Legs[0].Length
		if m.nFeet == 2 {
			short = math.Min(short, p.Legs[1].Length)
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

// NumLinks is the number of rigid links (legs, then the torso).
func (m *Model) NumLinks() int { return m.nLinks }

// NumFeet is 2, or 1 for a Params.OneLeg model.
func (m *Model) NumFeet() int { return m.nFeet }

// NumActuators is the number of joint torques Input.Torque carries.
func (m *Model) NumActuators() int { return m.nAct }

// HasTorso reports whether the walker has a torso link.
func (m *Model) HasTorso() bool { return m.torso >= 0 }

// JointNames returns the actuated joints in the order of Input.Torque and
// of JointState: "hip" for a compass walker, "hip_left", "hip_right" with
// a torso. The caller may keep the slice but must not change it.
func (m *Model) JointNames() []string { return m.jointNames }

// axis returns a(θ) = (sin θ, −cos θ) and a⊥(θ) = (cos θ, sin θ).
func axis(th float64) (a, ap [2]float64) {
	s, c := math.Sincos(th)
	return [2]float64{s, -c}, [2]float64{c, s}
}

// footCentre returns the arc centre of foot i, its derivative with respect
// to the leg angle, and its second derivative (for velocity products).
func (m *Model) footCentre(q *[MaxDOF]float64, i int) (c, dc, ddc [2]float64) {
	f := &m.feet[i]
	a, ap := axis(q[2+i])
	k := f.length - f.radius
	c = [2]float64{q[0] + k*a[0] + f.offset*ap[0], q[1] + k*a[1] + f.offset*ap[1]}
	dc = [2]float64{k*ap[0] - f.offset*a[0], k*ap[1] - f.offset*a[1]}
	ddc = [2]float64{-k*a[0] - f.offset*ap[0], -k*a[1] - f.offset*ap[1]}
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
}

// massBias fills the mass matrix M(q) and the bias h(q, q̇) (velocity
// products and gravity). With absolute angles the links couple only through
// the hip, so M has an arrow shape.
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
}

// generalizedInput adds B τ and the hip push to Q.
func (m *Model) generalizedInput(in *Input, Q *[MaxDOF]float64) {
	if in == nil {
		return
	}
	Q[0] += in.HipForce[0]
	Q[1] += in.HipForce[1]
	switch {
	case m.nAct == 1:
		Q[2] -= in.Torque[0]
		Q[3] += in.Torque[0]
	case m.nAct == 2:
		for j := 0; j < 2; j++ {
			Q[2+j] += in.Torque[j]
			Q[2+m.torso] -= in.Torque[j]
		}
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

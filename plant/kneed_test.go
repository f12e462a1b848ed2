package plant

import (
	"math"
	"testing"
)

// The kneed walker against testdata/reference/kneed_sympy.json: a SymPy
// derivation by Lagrange's equations of the planar tree (hip mass, thighs,
// shanks, optional torso, arc feet on the shanks), written from the bodies'
// positions and independent of this package (see
// testdata/reference/README.md).

type refShank struct {
	Length   float64 `json:"length"`
	Mass     float64 `json:"mass"`
	COMDist  float64 `json:"com_dist"`
	Inertia  float64 `json:"inertia"`
	Actuated bool    `json:"actuated"`
}

type refKneedLeg struct {
	refLeg
	Shank *refShank `json:"shank"`
}

type refTorso struct {
	Mass    float64 `json:"mass"`
	COMDist float64 `json:"com_dist"`
	Inertia float64 `json:"inertia"`
}

type refKneedParams struct {
	HipMass float64        `json:"hip_mass"`
	Gravity float64        `json:"gravity"`
	Slope   float64        `json:"slope"`
	Torso   *refTorso      `json:"torso"`
	Legs    [2]refKneedLeg `json:"legs"`
}

func (r refKneedParams) plantParams() Params {
	p := Params{HipMass: r.HipMass, Gravity: r.Gravity,
		Terrain: Terrain{Segments: []Segment{{Length: 1, Slope: r.Slope, MuStatic: 1, MuKinetic: 1}}}}
	for i, l := range r.Legs {
		p.Legs[i] = Leg{Length: l.Length, Mass: l.Mass, COMDist: l.COMDist, Inertia: l.Inertia,
			FootRadius: l.FootRadius, ArcOffset: l.ArcOffset}
		if s := l.Shank; s != nil {
			p.Legs[i].Shank = &Shank{Length: s.Length, Mass: s.Mass, COMDist: s.COMDist, Inertia: s.Inertia, Actuated: s.Actuated}
		}
	}
	if t := r.Torso; t != nil {
		p.Torso = &Torso{Mass: t.Mass, COMDist: t.COMDist, Inertia: t.Inertia}
	}
	return p
}

type refSolve struct {
	Accel          []float64 `json:"accel"`
	Force          []float64 `json:"force"`
	KneeMultiplier []float64 `json:"knee_multiplier"`
}

type kneedFixture struct {
	Cases []struct {
		Name           string         `json:"name"`
		Params         refKneedParams `json:"params"`
		DOF            int            `json:"dof"`
		InputMatrix    [][]float64    `json:"input_matrix"`
		KneeConstraint [][]float64    `json:"knee_constraint"`
		States         []struct {
			Q            []float64   `json:"q"`
			V            []float64   `json:"v"`
			Tau          []float64   `json:"tau"`
			KneesLocked  bool        `json:"knees_locked"`
			MassMatrix   [][]float64 `json:"mass_matrix"`
			Bias         []float64   `json:"bias"`
			Kinetic      float64     `json:"kinetic_energy"`
			Potential    float64     `json:"potential_energy"`
			Feet         []refFoot   `json:"feet"`
			LeftRolling  refSolve    `json:"left_rolling"`
			LockedRoling *refSolve   `json:"left_rolling_knees_locked"`
		} `json:"states"`
	} `json:"cases"`
}

func flat(rows [][]float64) []float64 {
	var out []float64
	for _, r := range rows {
		out = append(out, r...)
	}
	return out
}

func TestMatchesSymPyKneedWalker(t *testing.T) {
	var fx kneedFixture
	readFixture(t, "kneed_sympy.json", &fx)
	if len(fx.Cases) < 3 {
		t.Fatalf("kneed_sympy.json has %d cases, want ≥ 3", len(fx.Cases))
	}
	const tol = 1e-9 // relative, as the issue asks
	for _, c := range fx.Cases {
		t.Run(c.Name, func(t *testing.T) {
			m, err := New(c.Params.plantParams(), Options{})
			if err != nil {
				t.Fatal(err)
			}
			n := m.NumDOF()
			if n != c.DOF {
				t.Fatalf("NumDOF %d, fixture %d", n, c.DOF)
			}
			nAct := len(c.InputMatrix[0])
			if m.NumActuators() != nAct {
				t.Fatalf("NumActuators %d, fixture %d (%v)", m.NumActuators(), nAct, m.JointNames())
			}
			for j := 0; j < nAct; j++ {
				b := m.InputMatrix(j)
				var want []float64
				for _, row := range c.InputMatrix {
					want = append(want, row[j])
				}
				closeVec(t, "B column", b[:n], want, tol)
			}
			if len(c.KneeConstraint) != m.NumKnees() {
				t.Fatalf("NumKnees %d, fixture %d", m.NumKnees(), len(c.KneeConstraint))
			}
			var lockAll State
			lockAll.KneeLocked = [2]bool{true, true}
			var rows saddle
			m.kneeRows(&lockAll, &rows, nil)
			for r, want := range c.KneeConstraint {
				closeVec(t, "knee constraint row", rows.j[r][:n], want, 0)
			}
			if len(c.States) < 10 {
				t.Fatalf("fixture has %d states, want ≥ 10", len(c.States))
			}
			for j, st := range c.States {
				var s State
				copy(s.Q[:], st.Q)
				copy(s.V[:], st.V)
				var M [MaxDOF][MaxDOF]float64
				var h [MaxDOF]float64
				m.massBias(&s.Q, &s.V, &M, &h)
				var got []float64
				for r := 0; r < n; r++ {
					got = append(got, M[r][:n]...)
				}
				closeVec(t, "M", got, flat(st.MassMatrix), tol)
				closeVec(t, "h", h[:n], st.Bias, tol)
				// The dense solve builds M from the trigonometry table.
				var tr trig
				m.trigOf(&s.Q, &tr)
				var M2 [MaxDOF][MaxDOF]float64
				m.massTrig(&tr, &M2)
				if M2 != M {
					t.Errorf("state %d: massTrig and massBias disagree", j)
				}
				// biasTrig subtracts h from a zero force.
				var f [MaxDOF]float64
				m.biasTrig(&tr, &s.V, &f)
				for k := range f[:n] {
					f[k] = -f[k]
				}
				closeVec(t, "h (biasTrig)", f[:n], st.Bias, tol)
				ke, pe := m.Energy(&s)
				closeVec(t, "energy", []float64{ke, pe}, []float64{st.Kinetic, st.Potential}, tol)
				vmax := 0.0
				for _, x := range st.V {
					vmax = math.Max(vmax, math.Abs(x))
				}
				for i := 0; i < 2; i++ {
					var g footGeom
					m.footGeometry(&s.Q, &s.V, i, 0, &g)
					cc, _, _ := m.footCentre(&s.Q, i)
					fr := st.Feet[i]
					closeVec(t, "arc centre (footCentre)", cc[:], fr.ArcCenter, tol)
					closeVec(t, "arc centre (geometry)", g.c[:], fr.ArcCenter, tol)
					if d := math.Abs(g.gap - fr.Gap); d > tol {
						t.Errorf("state %d foot %d gap %.17g, want %.17g", j, i, g.gap, fr.Gap)
					}
					closeVec(t, "J_c", append(append([]float64{}, g.jt[:n]...), g.jn[:n]...), flat(fr.Jacobian), tol)
					closeVec(t, "J̇_c q̇", []float64{g.gt, g.gn}, fr.JdotV, tol)
					closeVecScale(t, "J_c q̇", []float64{g.slip, g.vn}, fr.PointVelocity, tol, vmax)
				}
				var in Input
				copy(in.Torque[:], st.Tau)
				s.Mode = [2]ContactMode{Rolling, Free}
				var ev eval
				m.rhs(&s, &s.Q, &s.V, &in, &ev)
				if !ev.ok {
					t.Fatalf("state %d: constrained dynamics failed", j)
				}
				closeVec(t, "q̈ (left rolling, knees free)", ev.acc[:n], st.LeftRolling.Accel, tol)
				closeVec(t, "λ (left rolling, knees free)", ev.force[0][:], st.LeftRolling.Force, tol)
				if st.LockedRoling == nil {
					continue
				}
				s.KneeLocked = [2]bool{true, true}
				m.rhs(&s, &s.Q, &s.V, &in, &ev)
				if !ev.ok {
					t.Fatalf("state %d: constrained dynamics with locked knees failed", j)
				}
				lr := st.LockedRoling
				closeVec(t, "q̈ (left rolling, knees locked)", ev.acc[:n], lr.Accel, tol)
				closeVec(t, "λ (left rolling, knees locked)", ev.force[0][:], lr.Force, tol)
				var kt []float64
				for i := 0; i < 2; i++ {
					if m.kneeOf[i] >= 0 {
						kt = append(kt, -ev.knee[i])
					}
				}
				closeVec(t, "knee multiplier", kt, lr.KneeMultiplier, tol)
			}
		})
	}
}

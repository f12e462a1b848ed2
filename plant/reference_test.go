package plant

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"testing"
)

// The fixtures under testdata/reference are written by SymPy and SciPy
// scripts (Debian python3-sympy, python3-scipy) that derive the compass
// walker independently by Lagrange's equations; see
// testdata/reference/README.md for the format and the command that
// regenerates them. These tests read the JSON only and need no Python.

type refLeg struct {
	Length     float64 `json:"length"`
	Mass       float64 `json:"mass"`
	COMDist    float64 `json:"com_dist"`
	Inertia    float64 `json:"inertia"`
	FootRadius float64 `json:"foot_radius"`
	ArcOffset  float64 `json:"arc_offset"`
}

type refParams struct {
	HipMass float64   `json:"hip_mass"`
	Legs    [2]refLeg `json:"legs"`
	Gravity float64   `json:"gravity"`
	Slope   float64   `json:"slope"`
}

// plantParams turns a fixture parameter set into plant parameters: one
// terrain segment through the origin, which the plant extends without end
// in both directions (as the fixture's straight line).
func (r refParams) plantParams(mu float64) Params {
	var p Params
	p.HipMass = r.HipMass
	p.Gravity = r.Gravity
	for i, l := range r.Legs {
		p.Legs[i] = Leg{Length: l.Length, Mass: l.Mass, COMDist: l.COMDist, Inertia: l.Inertia,
			FootRadius: l.FootRadius, ArcOffset: l.ArcOffset}
	}
	p.Terrain = Terrain{Segments: []Segment{{Length: 1, Slope: r.Slope, MuStatic: mu, MuKinetic: mu}}}
	return p
}

type refFoot struct {
	ArcCenter     []float64   `json:"arc_center"`
	ContactPoint  []float64   `json:"contact_point"`
	Gap           float64     `json:"gap"`
	Jacobian      [][]float64 `json:"jacobian"`
	JdotV         []float64   `json:"jdot_v"`
	PointVelocity []float64   `json:"point_velocity"`
}

type refState struct {
	Q           []float64   `json:"q"`
	V           []float64   `json:"v"`
	Tau         float64     `json:"tau"`
	MassMatrix  [][]float64 `json:"mass_matrix"`
	Bias        []float64   `json:"bias"`
	Kinetic     float64     `json:"kinetic_energy"`
	Potential   float64     `json:"potential_energy"`
	Feet        []refFoot   `json:"feet"`
	LeftRolling struct {
		Accel []float64 `json:"accel"`
		Force []float64 `json:"force"`
	} `json:"left_rolling"`
}

type sympyFixture struct {
	Cases []struct {
		Name        string      `json:"name"`
		Params      refParams   `json:"params"`
		InputMatrix [][]float64 `json:"input_matrix"`
		States      []refState  `json:"states"`
	} `json:"cases"`
}

func readFixture(t testing.TB, name string, v any) {
	t.Helper()
	path := filepath.Join("..", "testdata", "reference", name)
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("reference fixture %s: %v (regenerate it with the command in testdata/reference/README.md)", path, err)
	}
	if err := json.Unmarshal(b, v); err != nil {
		t.Fatalf("reference fixture %s: %v", path, err)
	}
}

// closeVec checks got against want with a norm-wise relative tolerance:
// every entry within tol × the largest |want| entry (zero entries of a
// vector cannot carry a relative error of their own).
func closeVec(t *testing.T, what string, got, want []float64, tol float64) {
	t.Helper()
	closeVecScale(t, what, got, want, tol, 0)
}

// closeVecScale is closeVec with a floor on the scale, for quantities that
// are zero up to rounding (a stance foot's point velocity): the floor is
// the size of the terms that cancel.
func closeVecScale(t *testing.T, what string, got, want []float64, tol, floor float64) {
	t.Helper()
	if len(got) < len(want) {
		t.Fatalf("%s: have %d values, want %d", what, len(got), len(want))
	}
	scale := floor
	for _, w := range want {
		scale = math.Max(scale, math.Abs(w))
	}
	if scale == 0 {
		scale = 1
	}
	for i, w := range want {
		if d := math.Abs(got[i] - w); !(d <= tol*scale) {
			t.Errorf("%s[%d] = %.17g, want %.17g (difference %.3g, relative %.3g, tolerance %g)",
				what, i, got[i], w, d, d/scale, tol)
		}
	}
}

func TestMatchesSymPyCompassWalker(t *testing.T) {
	var fx sympyFixture
	readFixture(t, "compass_sympy.json", &fx)
	if len(fx.Cases) == 0 {
		t.Fatal("no cases in compass_sympy.json")
	}
	const tol = 1e-9 // relative, as the issue asks
	for _, c := range fx.Cases {
		t.Run(c.Name, func(t *testing.T) {
			m, err := New(c.Params.plantParams(1), Options{})
			if err != nil {
				t.Fatal(err)
			}
			if len(c.States) < 10 {
				t.Fatalf("fixture has %d states, want ≥ 10", len(c.States))
			}
			var bcol []float64
			for _, row := range c.InputMatrix {
				bcol = append(bcol, row[0])
			}
			b := m.InputMatrix(0)
			closeVec(t, "B", b[:4], bcol, tol)
			for j, st := range c.States {
				var s State
				copy(s.Q[:], st.Q)
				copy(s.V[:], st.V)
				var M [MaxDOF][MaxDOF]float64
				var h [MaxDOF]float64
				m.massBias(&s.Q, &s.V, &M, &h)
				var flat, wantFlat []float64
				for r := 0; r < 4; r++ {
					flat = append(flat, M[r][:4]...)
					wantFlat = append(wantFlat, st.MassMatrix[r]...)
				}
				closeVec(t, "M", flat, wantFlat, tol)
				closeVec(t, "h", h[:4], st.Bias, tol)
				ke, pe := m.Energy(&s)
				closeVec(t, "energy", []float64{ke, pe}, []float64{st.Kinetic, st.Potential}, tol)
				for i := 0; i < 2; i++ {
					var g footGeom
					m.footGeometry(&s.Q, &s.V, i, 0, &g)
					c, _, _ := m.footCentre(&s.Q, i)
					R := m.feet[i].radius
					cp := []float64{c[0] - R*g.sp.n[0], c[1] - R*g.sp.n[1]}
					f := st.Feet[i]
					closeVec(t, "arc centre", c[:], f.ArcCenter, tol)
					closeVec(t, "contact point", cp, f.ContactPoint, tol)
					if d := math.Abs(g.gap - f.Gap); d > tol*m.feet[i].length {
						t.Errorf("state %d foot %d gap %.17g, want %.17g", j, i, g.gap, f.Gap)
					}
					closeVec(t, "J_c", append(append([]float64{}, g.jt[:4]...), g.jn[:4]...),
						append(append([]float64{}, f.Jacobian[0]...), f.Jacobian[1]...), tol)
					closeVec(t, "J̇_c q̇", []float64{g.gt, g.gn}, f.JdotV, tol)
					vmax := 0.0
					for _, x := range st.V {
						vmax = math.Max(vmax, math.Abs(x))
					}
					closeVecScale(t, "J_c q̇", []float64{g.slip, g.vn}, f.PointVelocity, tol, vmax)
				}
				s.Mode = [2]ContactMode{Rolling, Free}
				var in Input
				in.Torque[0] = st.Tau
				var ev eval
				m.rhs(&s, &s.Q, &s.V, &in, &ev)
				if !ev.ok {
					t.Fatalf("state %d: constrained dynamics failed", j)
				}
				closeVec(t, "q̈ (left rolling)", ev.acc[:4], st.LeftRolling.Accel, tol)
				closeVec(t, "λ (left rolling)", ev.force[0][:], st.LeftRolling.Force, tol)
			}
		})
	}
}

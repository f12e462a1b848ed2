package plant

import (
	"math"
	"math/cmplx"
	"testing"
)

// simplestWalker is the simplest walking model of Garcia, Chatterjee,
// Ruina, Coleman (1998), J. Biomech. Eng. 120(2):281–288: a point mass M at
// the hip, point feet (R = 0), legs of length L whose mass is a point mass m
// at the foot with m/M = 1e-9 (the massless-leg limit is approached, not
// taken exactly: Cholesky is insensitive to the diagonal scaling this
// gives, and the fixed point moves by about the mass ratio, ~1e-9
// relative). L = g = M = 1, so time is in units of √(L/g). The slope γ
// walks downhill: terrain slope −γ.
func simplestWalker(t testing.TB, gamma float64) *Model {
	t.Helper()
	leg := Leg{Length: 1, Mass: 1e-9, COMDist: 1, Inertia: 0, FootRadius: 0}
	p := Params{HipMass: 1, Legs: [2]Leg{leg, leg}, Gravity: 1,
		Terrain: Terrain{Segments: []Segment{{Length: 1000, Slope: -gamma, MuStatic: 10, MuKinetic: 10}}}}
	m, err := New(p, Options{IgnoreScuff: true})
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// garciaState maps Garcia's state just after heel strike to ours. Garcia's
// θ is the stance leg's angle from the slope normal and φ the angle between
// the legs (swing leg at θ − φ from the normal); our angles are absolute
// from the world vertical, and the slope normal is at −γ, so
// θ_stance = θ_G − γ, θ_swing = θ_G − φ_G − γ, and the rates are equal. On
// the section φ = 2θ, and in the massless-leg limit φ̇ = (1 − cos 2θ) θ̇.
func garciaState(t testing.TB, m *Model, gamma, th, thd float64) State {
	t.Helper()
	phi, phid := 2*th, (1-math.Cos(2*th))*thd
	s, err := m.Stand(0, 0, [2]float64{th - gamma, th - phi - gamma}, 0, thd, thd-phid)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

func TestSimplestWalkerFixedPoints(t *testing.T) {
	// Published fixed points and eigenvalues: Garcia et al. (1998), as
	// quoted in DESIGN.md 3.6; the eigenvalues there are finite-difference
	// estimates good to about 1e-3 (Bhounsule 2014, Dyn. Contin. Discrete
	// Impuls. Syst. B 21:137–148), so they are compared within 5e-3.
	const gamma = 0.009
	cases := []struct {
		name      string
		th, thd   float64
		stable    bool
		published []complex128
	}{
		{"long step, stable", 0.20031090049483, -0.19983247291764, true,
			[]complex128{complex(-0.19120868949940, 0.55633363687106), complex(-0.19120868949940, -0.55633363687106)}},
		{"short step, unstable", 0.19393736960624, -0.20386692731962, false,
			[]complex128{4.000, 0.459}},
	}
	m := simplestWalker(t, gamma)
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			// Start 1e-3 away from the published point.
			guess := garciaState(t, m, gamma, c.th+1e-3, c.thd-1e-3)
			g, err := FindGait(m, nil, guess, GaitOptions{})
			if err != nil {
				t.Fatal(err)
			}
			if !g.Found {
				t.Fatalf("not converged, residual %g", g.Residual)
			}
			th := g.Reduced[0] + gamma
			thd := g.Reduced[2]
			t.Logf("θ* = %.14f (published %.14f), θ̇* = %.14f (published %.14f), iterations %d, residual %.2g",
				th, c.th, thd, c.thd, g.Iterations, g.Residual)
			t.Logf("eigenvalues %v, period %.6f", g.Eigenvalues, g.Period)
			if d := math.Abs(th-c.th) / math.Abs(c.th); d > 1e-8 {
				t.Errorf("θ* relative error %.3g > 1e-8", d)
			}
			if d := math.Abs(thd-c.thd) / math.Abs(c.thd); d > 1e-8 {
				t.Errorf("θ̇* relative error %.3g > 1e-8", d)
			}
			if g.Stable != c.stable {
				t.Errorf("stable = %v, want %v", g.Stable, c.stable)
			}
			for _, want := range c.published {
				best := math.Inf(1)
				for _, e := range g.Eigenvalues {
					best = math.Min(best, cmplx.Abs(e-want))
				}
				if best > 5e-3 {
					t.Errorf("no eigenvalue within 5e-3 of the published %v (have %v)", want, g.Eigenvalues)
				}
			}
		})
	}
}

func TestSimplestWalkerStabilityAlongSlope(t *testing.T) {
	// Garcia et al. (1998): the stable period-one gait exists at small
	// slopes and loses stability near γ ≈ 0.015 by period doubling (an
	// eigenvalue leaves the unit circle through −1). Checked loosely:
	// stable at 0.010 and 0.014, unstable at 0.016. Continuation in γ from
	// the published fixed point at 0.009.
	th, thd := 0.20031090049483, -0.19983247291764
	want := map[float64]bool{0.010: true, 0.014: true, 0.016: false}
	for _, gamma := range []float64{0.010, 0.011, 0.012, 0.013, 0.014, 0.015, 0.016} {
		m := simplestWalker(t, gamma)
		g, err := FindGait(m, nil, garciaState(t, m, gamma, th, thd), GaitOptions{})
		if err != nil {
			t.Fatalf("γ = %g: %v", gamma, err)
		}
		if !g.Found {
			t.Fatalf("γ = %g: not converged (residual %g)", gamma, g.Residual)
		}
		th, thd = g.Reduced[0]+gamma, g.Reduced[2]
		t.Logf("γ = %.3f: θ* = %.6f, θ̇* = %.6f, |λ|max = %.4f, λ = %.4f", gamma, th, thd, cmplx.Abs(g.Eigenvalues[0]), g.Eigenvalues[0])
		if w, ok := want[gamma]; ok && g.Stable != w {
			t.Errorf("γ = %g: stable = %v, want %v (eigenvalues %v)", gamma, g.Stable, w, g.Eigenvalues)
		}
		if gamma == 0.016 && !(real(g.Eigenvalues[0]) < -1 && math.Abs(imag(g.Eigenvalues[0])) < 1e-9) {
			t.Errorf("γ = 0.016: expected a real eigenvalue below −1 (period doubling), have %v", g.Eigenvalues[0])
		}
	}
}

package plant

import (
	"math"
	"math/rand"
	"testing"
)

// TestOneFootPathMatchesGeneralSolve: the closed-form solve for one rolling
// foot and the general saddle-point elimination must give the same
// accelerations and contact force, for ordinary legs and for the nearly
// massless legs of the simplest walking model (our own cross-check of two
// derivations of the same equations).
func TestOneFootPathMatchesGeneralSolve(t *testing.T) {
	rng := rand.New(rand.NewSource(7))
	models := map[string]*Model{"demo with torso": nil, "simplest walker": simplestWalker(t, 0.009)}
	var err error
	if models["demo with torso"], err = New(DemoParams(), Options{}); err != nil {
		t.Fatal(err)
	}
	for name, m := range models {
		for trial := 0; trial < 20; trial++ {
			var s State
			for i := 0; i < m.n; i++ {
				s.Q[i] = rng.Float64() - 0.5
				s.V[i] = 2 * (rng.Float64() - 0.5)
			}
			s.Q[1] += 1
			stance := trial % 2
			s.Mode[stance] = Rolling
			s.Stance = stance
			var in Input
			in.Torque[0], in.Torque[1] = rng.NormFloat64(), rng.NormFloat64()
			var ev eval
			m.rhs(&s, &s.Q, &s.V, &in, &ev)
			if !ev.ok {
				t.Fatalf("%s: rhs failed", name)
			}
			var tr trig
			m.trigOf(&s.Q, &tr)
			var f [MaxDOF]float64
			m.generalizedInput(&in, &f)
			m.biasTrig(&tr, &s.V, &f)
			g := &ev.geom[stance]
			var sd saddle
			sd.k = 2
			sd.j[0], sd.w[0], sd.bottom[0], sd.foot[0], sd.kind[0] = g.jt, g.jt, -g.gt, stance, 0
			sd.j[1], sd.w[1], sd.bottom[1], sd.foot[1], sd.kind[1] = g.jn, g.jn, -g.gn, stance, 1
			var acc [MaxDOF]float64
			var lam [maxRows]float64
			if !m.solveSaddleWith(&tr, &f, &sd, &acc, &lam, false) {
				t.Fatalf("%s: general solve failed", name)
			}
			scale := 0.0
			for i := 0; i < m.n; i++ {
				scale = math.Max(scale, math.Abs(acc[i]))
			}
			for i := 0; i < m.n; i++ {
				if d := math.Abs(acc[i] - ev.acc[i]); d > 1e-10*scale {
					t.Errorf("%s trial %d: q̈[%d] %.15g (closed form) vs %.15g (general)", name, trial, i, ev.acc[i], acc[i])
				}
			}
			fs := math.Hypot(lam[0], lam[1])
			if d := math.Hypot(lam[0]-ev.force[stance][0], lam[1]-ev.force[stance][1]); d > 1e-10*fs {
				t.Errorf("%s trial %d: λ %v (closed form) vs %v (general)", name, trial, ev.force[stance], lam[:2])
			}
		}
	}
}

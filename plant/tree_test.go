package plant

import (
	"math/rand"
	"testing"
)

// solveTree (groups of links eliminated through the hip, locked knees as
// rigid legs) must give what the dense elimination of the whole saddle
// system gives, for every mix of rows the plant builds: no contact, one or
// two feet (rolling or sliding, so W ≠ J), knees locked or free, knee rows
// with a prescribed rate (a knee strike's impulse), with and without a
// torso and a straight leg.
func TestSolveTreeMatchesDense(t *testing.T) {
	kneed, _ := kneedPair(t)
	withTorso := kneed.Params()
	withTorso.Torso = &Torso{Mass: 12, COMDist: 0.3, Inertia: 0.5}
	withTorso.Legs[1].Shank.Actuated = true
	oneKnee := kneed.Params()
	oneKnee.Legs[1].Shank = nil
	oneKnee.Legs[1].Length = 0.9
	rng := rand.New(rand.NewSource(12))
	checked := 0
	for _, p := range []Params{kneed.Params(), withTorso, oneKnee} {
		m, err := New(p, Options{})
		if err != nil {
			t.Fatal(err)
		}
		for trial := 0; trial < 200; trial++ {
			var s State
			for i := 2; i < m.n; i++ {
				s.Q[i] = rng.Float64() - 0.5
				s.V[i] = 4 * (rng.Float64() - 0.5)
			}
			s.V[0], s.V[1] = rng.Float64()-0.5, rng.Float64()-0.5
			var tr trig
			m.trigOf(&s.Q, &tr)
			var f [MaxDOF]float64
			for i := 0; i < m.n; i++ {
				f[i] = 50 * (rng.Float64() - 0.5)
			}
			var sd saddle
			for i := 0; i < m.nFeet; i++ {
				var g footGeom
				m.footGeometry(&s.Q, &s.V, i, 0, &g)
				switch rng.Intn(3) {
				case 1: // rolling
					sd.j[sd.k], sd.w[sd.k], sd.foot[sd.k], sd.kind[sd.k] = g.jt, g.jt, i, 0
					sd.bottom[sd.k] = rng.Float64() - 0.5
					sd.k++
					sd.j[sd.k], sd.w[sd.k], sd.foot[sd.k], sd.kind[sd.k] = g.jn, g.jn, i, 1
					sd.bottom[sd.k] = rng.Float64() - 0.5
					sd.k++
				case 2: // sliding: W = J_n − μ J_t
					sd.j[sd.k], sd.foot[sd.k], sd.kind[sd.k] = g.jn, i, 1
					for d := 0; d < m.n; d++ {
						sd.w[sd.k][d] = g.jn[d] - 0.6*g.jt[d]
					}
					sd.bottom[sd.k] = rng.Float64() - 0.5
					sd.k++
				}
			}
			s.KneeLocked = [2]bool{rng.Intn(2) == 0, rng.Intn(2) == 0}
			first := sd.k
			m.kneeRows(&s, &sd, nil)
			for r := first; r < sd.k; r++ {
				if rng.Intn(2) == 0 {
					sd.bottom[r] = 3 * (rng.Float64() - 0.5)
				}
			}
			var xd, xt [MaxDOF]float64
			var ld, lt [maxRows]float64
			okD := m.solveDense(&tr, &f, &sd, &xd, &ld)
			okT := m.solveTree(&tr, &f, &sd, &xt, &lt)
			if okD != okT {
				t.Fatalf("trial %d: dense ok %v, tree ok %v", trial, okD, okT)
			}
			if !okD {
				continue
			}
			checked++
			closeVec(t, "q̈ (tree vs dense)", xt[:m.n], xd[:m.n], 1e-10)
			closeVec(t, "λ (tree vs dense)", lt[:sd.k], ld[:sd.k], 1e-10)
			if t.Failed() {
				t.Fatalf("trial %d, rows %d, kinds %v, feet %v, locked %v", trial, sd.k, sd.kind[:sd.k], sd.foot[:sd.k], s.KneeLocked)
			}
		}
	}
	if checked < 500 {
		t.Errorf("only %d of 600 systems solvable", checked)
	}
}

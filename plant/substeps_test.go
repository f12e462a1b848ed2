package plant

import (
	"math"
	"testing"
)

// The default number of RK4 sub-steps per tick is chosen by the accuracy
// budget (package doc, "Numerics"): a tick with DefaultSubSteps must follow
// the same walker integrated with 64 sub-steps (a local error 64⁵ ≈ 1e9
// times smaller, so a reference to well below 1e-15) to within 1e-9 in
// every coordinate and rate over 2 s of passive stance, for the compass
// walker and for the walker with a torso, and over 0.2 s for a kneed
// walker (BenchmarkTickKneed's) on a latched stance knee with the swing
// knee free. That is a thousand times finer
// than anything the rig reports (angles to 1e-6 rad are beyond any encoder
// a bench uses: common practice).
func TestDefaultSubStepsAccuracy(t *testing.T) {
	for _, walker := range []string{"compass", "torso", "kneed"} {
		torso := walker == "torso"
		p := DemoParams()
		p.Legs[0].FootRadius = p.Legs[0].Length
		p.Legs[1].Length, p.Legs[1].FootRadius, p.Legs[1].COMDist = 0.5, 0.1, 0.2
		if torso {
			p.Torso.COMDist = -0.3
		} else {
			p.Torso = nil
		}
		ticks := 2000
		if walker == "kneed" {
			for i := range p.Legs {
				p.Legs[i] = Leg{Length: 0.45, Mass: 1.8, COMDist: 0.2, Inertia: 0.03, FootRadius: 0.2,
					Shank: &Shank{Length: 0.45, Mass: 1.2, COMDist: 0.25, Inertia: 0.02, Latch: true}}
			}
			p.Legs[1].Shank.Length = 0.25
			ticks = 200
		}
		run := func(sub int) State {
			m, err := New(p, Options{SubSteps: sub})
			if err != nil {
				t.Fatal(err)
			}
			rates := []float64{0.3, -0.5, 0.1}[:min(3, m.NumLinks())]
			if walker == "kneed" {
				// The swing shank starts faster than its thigh: the knee
				// flexes and swings free.
				rates = []float64{0.3, -0.5, 0.3, -1.5}
			}
			s, err := m.Stand(0, 0, [2]float64{0.1, -0.2}, 0, rates...)
			if err != nil {
				t.Fatal(err)
			}
			if walker == "kneed" {
				s.KneeLatched[1] = false
				s.KneeLocked[1] = false
			}
			var r TickResult
			for i := 0; i < ticks; i++ {
				m.Step(&s, nil, 1e-3, &r)
				if r.NumEvents > 0 {
					t.Fatalf("%s, %d sub-steps, t = %g: unexpected event %v", walker, sub, s.T, r.Events[0].Kind)
				}
			}
			return s
		}
		got, ref := run(0), run(64)
		worst := 0.0
		for i := 0; i < MaxDOF; i++ {
			worst = math.Max(worst, math.Max(math.Abs(got.Q[i]-ref.Q[i]), math.Abs(got.V[i]-ref.V[i])))
		}
		t.Logf("%s: %d sub-steps per 1 ms tick differ from 64 by at most %.3g after %d ms", walker, DefaultSubSteps, worst, ticks)
		if worst > 1e-9 {
			t.Errorf("%s: default sub-steps differ from the 64-sub-step reference by %.3g > 1e-9", walker, worst)
		}
	}
}

package rig

import (
	"math/cmplx"
	"testing"

	"gaitrig/scenarios"
)

// TestLibraryInitialStates builds the plant of every built-in scenario and
// the state it starts from as a run does (InitialState), and places the
// walker in the scenario's explicit fields (its initial state, or with
// natural_gait the gait finder's guess): the plant must accept both. A
// passive scenario that starts from the natural gait must have a stable
// one near its guess, or it could not run.
func TestLibraryInitialStates(t *testing.T) {
	for _, e := range scenarios.Library() {
		t.Run(e.Name, func(t *testing.T) {
			s, err := scenarios.LoadBuiltin(e.Name)
			if err != nil {
				t.Fatal(err)
			}
			cfg, err := FromScenario(s)
			if err != nil {
				t.Fatal(err)
			}
			m, err := NewModel(s, cfg)
			if err != nil {
				t.Fatal(err)
			}
			if got, want := len(m.JointNames()), len(s.JointNames()); got != want {
				t.Fatalf("plant has %d joints %v, scenario says %v", got, m.JointNames(), s.JointNames())
			}
			for i, n := range m.JointNames() {
				if n != s.JointNames()[i] {
					t.Errorf("joint %d: plant calls it %s, scenario %s", i, n, s.JointNames()[i])
				}
			}
			if len(s.Initial.LegAnglesRad) != 2 {
				t.Fatal("a built-in scenario gives two leg angles: its initial state, or with natural_gait its gait-finder guess, so this test can check it")
			}
			if _, err := gaitGuess(s, m); err != nil {
				t.Fatalf("plant cannot stand the walker in the scenario's initial fields: %v", err)
			}
			if _, err := InitialState(s, m); err != nil {
				t.Fatalf("initial state: %v", err)
			}
			if !s.Initial.NaturalGait || s.Controller.Link != scenarios.LinkNone {
				return
			}
			g, err := FindGait(s, m)
			if err != nil {
				t.Fatalf("gait finder: %v", err)
			}
			if !g.Found || !g.Stable {
				t.Fatalf("no stable gait near the guess: found %v stable %v eigenvalues %v", g.Found, g.Stable, g.Eigenvalues)
			}
			for _, ev := range g.Eigenvalues {
				if cmplx.Abs(ev) >= 1 {
					t.Errorf("eigenvalue %v outside the unit circle of a gait called stable", ev)
				}
			}
			t.Logf("natural gait: step %.3f m, speed %.3f m/s, eigenvalues %v", g.StepLength, g.Speed, g.Eigenvalues)
		})
	}
}

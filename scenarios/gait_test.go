package scenarios

import (
	"math/cmplx"
	"testing"

	"gaitrig/plant"
)

// TestLibraryInitialStates builds the plant of every built-in scenario and
// places the walker in its initial state (or its gait-finder guess): the
// plant must accept both. A passive scenario that starts from the natural
// gait must have a stable one near its guess, or it could not run.
func TestLibraryInitialStates(t *testing.T) {
	for _, e := range Library() {
		t.Run(e.Name, func(t *testing.T) {
			s, err := LoadBuiltin(e.Name)
			if err != nil {
				t.Fatal(err)
			}
			p, err := s.PlantParams()
			if err != nil {
				t.Fatal(err)
			}
			m, err := plant.New(p, s.PlantOptions())
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
			in := s.Initial
			if len(in.LegAnglesRad) != 2 {
				t.Fatal("a built-in scenario gives two leg angles: its initial state, or with natural_gait its gait-finder guess, so this test can check it")
			}
			rates := []float64{0, 0}
			copy(rates, in.LegRatesRadps)
			if m.HasTorso() {
				rates = append(rates, in.TorsoRateRadps)
			}
			st, err := m.Stand(s.StanceLeg(), in.XM, [2]float64{in.LegAnglesRad[0], in.LegAnglesRad[1]}, in.TorsoAngleRad, rates...)
			if err != nil {
				t.Fatalf("plant cannot stand the walker in the initial state: %v", err)
			}
			if !in.NaturalGait || s.Controller.Link != LinkNone {
				return
			}
			g, err := plant.FindGait(m, nil, st, plant.GaitOptions{})
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

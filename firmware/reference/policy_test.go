package reference

import (
	"math"
	"math/cmplx"
	"testing"

	"gaitrig/plant"
)

// The closed loop of the demo walker and the default gains has a period-one
// gait, found by the plant's gait finder through PlantPolicy, and it is
// stable: every eigenvalue of the step-to-step map inside the unit circle.
// The gait must also match what a plain tick-by-tick simulation settles
// into (TestDefaultGainsWalkDemo): the same law seen by two different
// integrators.
func TestPlantPolicyGaitIsStable(t *testing.T) {
	m, err := plant.New(plant.DemoParams(), plant.Options{IgnoreScuff: true})
	if err != nil {
		t.Fatal(err)
	}
	// Settle with the tick simulation, then hand the state just after a
	// heel strike to the gait finder as its guess.
	s, err := m.Stand(0, 0, DemoStart.LegAngles, DemoStart.TorsoAngle, DemoStart.Rates[:]...)
	if err != nil {
		t.Fatal(err)
	}
	g := DefaultGains()
	pol := PlantPolicy(m, g)
	var in plant.Input
	var res plant.TickResult
	strikes := 0
	var lastLen float64
	lastX := 0.0
	for strikes < 20 {
		in = plant.Input{}
		pol(m, &s, &in)
		m.Step(&s, &in, 1e-3, &res)
		for i := 0; i < res.NumEvents; i++ {
			if res.Events[i].Kind == plant.HeelStrike {
				strikes++
				x := res.Contacts[res.Events[i].Foot].Point[0]
				lastLen, lastX = x-lastX, x
			}
		}
		if res.Stopped || s.T > 30 {
			t.Fatalf("tick simulation stopped at t = %.2f after %d strikes", s.T, strikes)
		}
	}
	gait, err := plant.FindGait(m, pol, s, plant.GaitOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if !gait.Found {
		t.Fatalf("no gait found (residual %g after %d iterations)", gait.Residual, gait.Iterations)
	}
	for _, ev := range gait.Eigenvalues {
		if cmplx.Abs(ev) >= 1 {
			t.Errorf("eigenvalue %v outside the unit circle", ev)
		}
	}
	if !gait.Stable {
		t.Error("gait reported unstable")
	}
	t.Logf("closed-loop gait: period %.4f s, step %.4f m, speed %.4f m/s; tick simulation step %.4f m; eigenvalues %v",
		gait.Period, gait.StepLength, gait.Speed, lastLen, gait.Eigenvalues)
	if math.Abs(gait.StepLength-lastLen) > 0.01 {
		t.Errorf("gait finder step %.4f m, tick simulation %.4f m: the same law should give the same gait", gait.StepLength, lastLen)
	}
}

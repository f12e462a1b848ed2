package plant_test

import (
	"fmt"

	"gaitrig/plant"
)

// A demo walker with a torso stands on its left foot, leaning forward, and
// is stepped for 0.1 s at 1 kHz with a small hip torque. The ground reaction
// force on the stance foot is what the firmware cannot measure.
func ExampleModel_Step() {
	m, err := plant.New(plant.DemoParams(), plant.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	// Left leg 0.15 rad ahead (foot forward), right leg 0.15 rad behind,
	// torso upright, all links turning backward at 0.8 rad/s (walking
	// forward over the stance foot).
	s, err := m.Stand(0, 0, [2]float64{0.15, -0.15}, 0, -0.8, -0.8, 0)
	if err != nil {
		fmt.Println(err)
		return
	}
	var in plant.Input
	in.Torque[0] = 5 // stance hip: push the stance leg backward against the torso
	var r plant.TickResult
	for tick := 0; tick < 100; tick++ {
		m.Step(&s, &in, 1e-3, &r)
		if r.Stopped {
			fmt.Println("stopped:", r.Events[0].Kind)
			return
		}
	}
	c := r.Contacts[0]
	fmt.Printf("t = %.3f s, left foot %s: N = %.1f N, F_t = %.1f N, friction utilization %.2f\n",
		s.T, c.Mode, c.Normal, c.Tangential, c.Utilization)
	// Output:
	// t = 0.100 s, left foot rolling: N = 288.1 N, F_t = -23.1 N, friction utilization 0.10
}

// FindGait finds the natural (passive) gait of a walker on a gentle
// downhill: here a walker of our own with curved feet, on a slope of 0.05 rad (2.9°). A
// firmware author can seed a controller with the result.
func ExampleFindGait() {
	leg := plant.Leg{Length: 0.9, Mass: 3, COMDist: 0.4, Inertia: 0.2, FootRadius: 0.3}
	p := plant.Params{HipMass: 10, Legs: [2]plant.Leg{leg, leg}, Gravity: 9.81,
		Terrain: plant.Terrain{Segments: []plant.Segment{{Length: 100, Slope: -0.05, MuStatic: 1, MuKinetic: 0.8}}}}
	m, err := plant.New(p, plant.Options{IgnoreScuff: true})
	if err != nil {
		fmt.Println(err)
		return
	}
	// A guess just after heel strike: left foot ahead and rolling.
	guess, err := m.Stand(0, 0, [2]float64{0.4, -0.5}, 0, -1.4, -0.6)
	if err != nil {
		fmt.Println(err)
		return
	}
	g, err := plant.FindGait(m, nil, guess, plant.GaitOptions{})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("found %v, stable %v\n", g.Found, g.Stable)
	fmt.Printf("stance leg %.4f rad, swing leg %.4f rad just after heel strike\n", g.Reduced[0], g.Reduced[1])
	fmt.Printf("period %.3f s, step %.3f m, speed %.3f m/s, peak friction %.3f\n",
		g.Period, g.StepLength, g.Speed, g.PeakRequiredFriction)
	// Output:
	// found true, stable true
	// stance leg 0.3992 rad, swing leg -0.4992 rad just after heel strike
	// period 0.874 s, step 0.791 m, speed 0.904 m/s, peak friction 0.279
}

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

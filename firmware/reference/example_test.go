package reference_test

import (
	"fmt"

	"gaitrig/firmware/reference"
)

// One reading of the torso walker standing on its left foot with the torso
// leaning 0.05 rad back: the swing hip drives the right leg forward with
// 33.12 N·m, and the stance hip adds 25.68 N·m so that the torso feels
// −(25.68 + 33.12) = −58.8 N·m = TorsoKp·(θT* − θT), pitching it forward
// toward the lean target.
func ExampleLaw() {
	g := reference.DefaultGains()
	r := reference.Reading{
		Joints:   2,
		Angle:    [2]float64{0.05, -0.35}, // hip_left, hip_right (leg minus torso)
		Rate:     [2]float64{-0.9, 1.5},
		Pitch:    0.05, // torso 0.05 rad back
		Contacts: 1,    // left switch closed
	}
	var tau [2]float64
	stance := reference.Law(&g, &r, tau[:])
	fmt.Printf("stance %d, hip_left %.2f N·m, hip_right %.2f N·m\n", stance, tau[0], tau[1])
	// Output: stance 0, hip_left 25.68 N·m, hip_right 33.12 N·m
}

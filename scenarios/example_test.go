package scenarios_test

import (
	"fmt"

	"gaitrig/scenarios"
)

// A malformed scenario gives every problem at once, each with its line and
// field path.
func ExampleParse() {
	text := []byte(`name: bench-check
plant:
  hip_mass_kg: 8
  legs:
    length_m: 0.9
    foot_radius_m: 1.2
    mass_kg: "4 kg"
terrain:
  segments:
    - {length_m: 10, mu_static: 0.8}
initial:
  leg_angles_rad: [0.2, -0.2]
controller:
  link: mqtt
  password: hunter2
run:
  max_steps: 10
`)
	_, err := scenarios.Parse("bench.yaml", text)
	fmt.Println(err)
	// Output:
	// bench.yaml:6: plant.legs.foot_radius_m: 1.2 m is larger than the leg length 0.9 m; allowed 0 ≤ foot_radius_m ≤ length_m
	// bench.yaml:7: plant.legs.mass_kg: "4 kg" has a unit written in the value; write a plain number in kg (the unit is part of the field name)
	// bench.yaml:15: controller.password: secrets never go in a scenario file: it is shared, hashed and copied into every run record; put the value in an environment variable and name that variable with password_env
}

// The built-in library is embedded in the binary.
func ExampleLoadBuiltin() {
	s, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		fmt.Println(err)
		return
	}
	p, _ := s.PlantParams()
	fmt.Println(s.Name, s.Controller.Link, s.Clock.Mode, s.Clock.TickHz, p.Legs[0].FootRadius/p.Legs[0].Length)
	// Output:
	// level-demo builtin lockstep 1000 0.3
}

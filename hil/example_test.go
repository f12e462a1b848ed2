package hil_test

import (
	"context"
	"fmt"
	"time"

	"gaitrig/bridges/inproc"
	"gaitrig/firmware/reference"
	"gaitrig/hil"
	"gaitrig/plant"
)

// The reference firmware walks the demo walker five steps in lockstep over
// the in-process link, with no run folder.
func ExampleRun() {
	cfg := hil.Config{
		Physics:   plant.Options{IgnoreScuff: true}, // a walker without knees cannot clear its swing foot
		MaxSteps:  5,
		Duration:  10,
		Watchdog:  2 * time.Second,
		Actuators: hil.ActuatorModel{TorqueLimit: 60},
		Sensors:   hil.SensorModel{CountsPerRev: 4096, ContactThreshold: 5},
	}
	m, _ := plant.New(plant.DemoParams(), cfg.Physics)
	ds := reference.DemoStart
	start, _ := m.Stand(0, 0, ds.LegAngles, ds.TorsoAngle, ds.Rates[:]...)

	rig, fw := inproc.Pair()
	defer rig.Close()
	go reference.Serve(fw, reference.Options{})

	res, err := hil.Run(context.Background(), cfg, m, start, rig, nil)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(res.Summary.Outcome, res.Summary.Steps, "steps")
	// Output: pass 5 steps
}

package rig_test

import (
	"context"
	"fmt"

	"gaitrig/rig"
	"gaitrig/scenarios"
)

// A built-in scenario runs against the built-in reference firmware, cut to
// five steps, without a run folder: the pipeline every command uses.
func ExampleRun() {
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		fmt.Println(err)
		return
	}
	res, err := rig.Run(context.Background(), sc, rig.Options{Link: "builtin", Clock: "lockstep", MaxSteps: 5, NoRecord: true})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(res.Summary.Steps, "steps,", "tripped:", res.Summary.Outcome == "tripped")
	// Output: 5 steps, tripped: false
}

// --link text is parsed by the registry of link kinds.
func ExampleParseLink() {
	l, err := rig.ParseLink("serial:/dev/ttyACM0@921600")
	fmt.Println(l.Kind, l.Addr, l.Baud, err)
	_, err = rig.ParseLink("usb")
	fmt.Println(err)
	// Output:
	// serial /dev/ttyACM0 921600 <nil>
	// --link "usb": unknown link; allowed: builtin, embedded, pty[@BAUD], serial:PORT[@BAUD], mqtt:URL
}

package record_test

import (
	"fmt"
	"os"
	"path/filepath"

	"gaitrig/record"
)

// Example writes a tiny run folder and reads it back.
func Example() {
	tmp, _ := os.MkdirTemp("", "gaitrig-example")
	defer os.RemoveAll(tmp)
	dir := filepath.Join(tmp, "run-0001")

	w, err := record.Create(dir, record.Manifest{
		Scenario: "example", Clock: "lockstep", TickHz: 1000,
		NumQ: 4, JointNames: []string{"hip"}, FootModes: []string{"free", "rolling", "sliding"},
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	for i := 0; i < 3; i++ {
		t := record.Tick{Index: int64(i), T: float64(i) / 1000}
		t.Q[1] = 0.9
		w.Tick(&t)
	}
	w.Event(record.Event{Tick: 2, T: 0.002, Kind: "torque_saturation", Severity: record.Warn,
		Message: "hip torque clipped to 50 N·m", Segment: record.NoSegment})
	w.Close(record.Summary{Outcome: record.Pass, Steps: 0, SimTimeS: 0.003})

	run, err := record.Open(dir)
	if err != nil {
		fmt.Println(err)
		return
	}
	ticks, truncated, _ := run.AllTicks()
	fmt.Println(run.Manifest.Scenario, len(ticks), truncated, run.Events[0].Kind, run.Summary.Outcome)
	fmt.Println(run.Manifest.Columns[:5])
	// Output:
	// example 3 false torque_saturation pass
	// [tick t_s wall_s x_hip_m y_hip_m]
}

package main

import (
	"encoding/json"
	"fmt"
	"math"
	"os"

	"gaitrig/record"
	"gaitrig/rig"
)

// baseline is the file a nightly suite compares against: the figures of a
// known-good firmware build per scenario, and how far each may move before
// it counts as a regression.
type baseline struct {
	Tolerances tolerances               `json:"tolerances"`
	Scenarios  map[string]baselineEntry `json:"scenarios"`
}

// tolerances say how far a figure may get worse before it is a regression.
// Improvements never are.
type tolerances struct {
	StepsAbs       int     `json:"steps_abs"`        // fewer heel strikes allowed
	SpeedRel       float64 `json:"speed_rel"`        // relative change of mean speed, either way
	FrictionAbs    float64 `json:"friction_abs"`     // rise of peak friction utilization
	NormalForceRel float64 `json:"normal_force_rel"` // relative drop of the minimum normal force
	LatencyP99Rel  float64 `json:"latency_p99_rel"`  // relative rise of p99 command latency
	NewAlarmKinds  bool    `json:"new_alarm_kinds"`  // an alarm kind the baseline did not have is a regression
}

// defaultTolerances are used for fields a baseline file leaves out. Lockstep
// runs are bit-repeatable, so these only absorb intended small changes of
// the firmware; they are our choice, stated in the README.
var defaultTolerances = tolerances{StepsAbs: 0, SpeedRel: 0.05, FrictionAbs: 0.05, NormalForceRel: 0.10, LatencyP99Rel: 0.5, NewAlarmKinds: true}

// baselineEntry is the recorded result of one scenario.
type baselineEntry struct {
	Outcome                 string         `json:"outcome"`
	Steps                   int            `json:"steps"`
	MeanSpeedMPS            float64        `json:"mean_speed_mps"`
	PeakFrictionUtilization float64        `json:"peak_friction_utilization"`
	MinNormalForceN         float64        `json:"min_normal_force_n"`
	LatencyP99US            *float64       `json:"latency_p99_us,omitempty"`
	Alarms                  map[string]int `json:"alarms,omitempty"`
}

// readBaseline loads a baseline file; tolerances it leaves out (zero) take
// the defaults, except new_alarm_kinds which is read as written when the
// tolerances block is present.
func readBaseline(path string) (*baseline, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, badUsage("baseline %s: %v", path, err)
	}
	var raw struct {
		Tolerances *json.RawMessage         `json:"tolerances"`
		Scenarios  map[string]baselineEntry `json:"scenarios"`
	}
	if err := json.Unmarshal(b, &raw); err != nil {
		return nil, badUsage("baseline %s: not valid JSON: %v", path, err)
	}
	bl := &baseline{Tolerances: defaultTolerances, Scenarios: raw.Scenarios}
	if raw.Tolerances != nil {
		t := defaultTolerances
		if err := json.Unmarshal(*raw.Tolerances, &t); err != nil {
			return nil, badUsage("baseline %s: tolerances: %v", path, err)
		}
		bl.Tolerances = t
	}
	if bl.Scenarios == nil {
		bl.Scenarios = map[string]baselineEntry{}
	}
	return bl, nil
}

// entryOf turns a run summary into a baseline entry.
func entryOf(s record.Summary) baselineEntry {
	e := baselineEntry{Outcome: string(s.Outcome), Steps: s.Steps, MeanSpeedMPS: s.MeanSpeedMPS,
		PeakFrictionUtilization: s.PeakFrictionUtilization, MinNormalForceN: s.MinNormalForceN, Alarms: s.Alarms}
	if s.LatencyUS != nil && !math.IsNaN(s.LatencyUS.P99) {
		p := s.LatencyUS.P99
		e.LatencyP99US = &p
	}
	return e
}

// compare lists, in words, what got worse from want to got beyond tol.
func compare(want, got baselineEntry, tol tolerances) []string {
	var out []string
	if got.Outcome != want.Outcome {
		out = append(out, fmt.Sprintf("outcome %s, baseline %s", got.Outcome, want.Outcome))
	}
	if got.Steps < want.Steps-tol.StepsAbs {
		out = append(out, fmt.Sprintf("steps %d, baseline %d (tolerance −%d)", got.Steps, want.Steps, tol.StepsAbs))
	}
	if want.MeanSpeedMPS != 0 && !math.IsNaN(want.MeanSpeedMPS) {
		rel := (got.MeanSpeedMPS - want.MeanSpeedMPS) / math.Abs(want.MeanSpeedMPS)
		if math.IsNaN(rel) || math.Abs(rel) > tol.SpeedRel {
			out = append(out, fmt.Sprintf("mean speed %.4f m/s, baseline %.4f m/s (tolerance ±%.0f%%)", got.MeanSpeedMPS, want.MeanSpeedMPS, 100*tol.SpeedRel))
		}
	}
	if !math.IsNaN(want.PeakFrictionUtilization) && (math.IsNaN(got.PeakFrictionUtilization) || got.PeakFrictionUtilization > want.PeakFrictionUtilization+tol.FrictionAbs) {
		out = append(out, fmt.Sprintf("peak friction utilization %.3f, baseline %.3f (tolerance +%.3f)", got.PeakFrictionUtilization, want.PeakFrictionUtilization, tol.FrictionAbs))
	}
	if want.MinNormalForceN > 0 && (math.IsNaN(got.MinNormalForceN) || got.MinNormalForceN < want.MinNormalForceN*(1-tol.NormalForceRel)) {
		out = append(out, fmt.Sprintf("minimum normal force %.1f N, baseline %.1f N (tolerance −%.0f%%)", got.MinNormalForceN, want.MinNormalForceN, 100*tol.NormalForceRel))
	}
	if want.LatencyP99US != nil && got.LatencyP99US != nil && *got.LatencyP99US > *want.LatencyP99US*(1+tol.LatencyP99Rel) {
		out = append(out, fmt.Sprintf("p99 command latency %.0f µs, baseline %.0f µs (tolerance +%.0f%%)", *got.LatencyP99US, *want.LatencyP99US, 100*tol.LatencyP99Rel))
	}
	if tol.NewAlarmKinds {
		for _, k := range sortedKeys(got.Alarms) {
			if got.Alarms[k] > 0 && want.Alarms[k] == 0 {
				out = append(out, fmt.Sprintf("new alarm kind %s (×%d), none in the baseline", k, got.Alarms[k]))
			}
		}
	}
	return out
}

// writeBaseline writes entries as a baseline file with the tolerances given.
func writeBaseline(path string, tol tolerances, entries map[string]baselineEntry) error {
	b, err := json.MarshalIndent(rig.JSONSafe(baseline{Tolerances: tol, Scenarios: entries}), "", "  ")
	if err != nil {
		return err
	}
	return os.WriteFile(path, append(b, '\n'), 0o644)
}

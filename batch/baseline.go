package batch

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"sort"

	"gaitrig/record"
	"gaitrig/rig"
)

// Baseline is the file a nightly suite compares against (baseline.json):
// the figures of a known-good firmware build per scenario, and how far each
// may move before it counts as a regression.
type Baseline struct {
	// Tolerances say how far each figure may get worse.
	Tolerances Tolerances `json:"tolerances"`
	// Scenarios holds the recorded figures by scenario name.
	Scenarios map[string]Entry `json:"scenarios"`
}

// Tolerances say how far a figure may get worse before it is a regression.
// Improvements never are.
type Tolerances struct {
	// StepsAbs is how many fewer heel strikes are allowed.
	StepsAbs int `json:"steps_abs"`
	// SpeedRel is the allowed relative change of the mean speed, either way.
	SpeedRel float64 `json:"speed_rel"`
	// FrictionAbs is the allowed rise of the peak friction utilization.
	FrictionAbs float64 `json:"friction_abs"`
	// NormalForceRel is the allowed relative drop of the minimum normal
	// force.
	NormalForceRel float64 `json:"normal_force_rel"`
	// LatencyP99Rel is the allowed relative rise of the p99 command
	// latency.
	LatencyP99Rel float64 `json:"latency_p99_rel"`
	// NewAlarmKinds true makes an alarm kind the baseline did not have a
	// regression.
	NewAlarmKinds bool `json:"new_alarm_kinds"`
}

// DefaultTolerances are used for fields a baseline file leaves out: no
// fewer steps, ±5 % mean speed, +0.05 friction utilization, −10 % minimum
// normal force, +50 % p99 latency, and a new alarm kind is a regression.
// Lockstep runs are bit-repeatable, so these only absorb intended small
// changes of the firmware; they are our choice, stated in the README.
var DefaultTolerances = Tolerances{StepsAbs: 0, SpeedRel: 0.05, FrictionAbs: 0.05, NormalForceRel: 0.10, LatencyP99Rel: 0.5, NewAlarmKinds: true}

// Entry is the recorded result of one scenario.
type Entry struct {
	// Outcome is the run outcome: pass, fail, tripped or aborted.
	Outcome string `json:"outcome"`
	// Steps is the number of heel strikes completed.
	Steps int `json:"steps"`
	// MeanSpeedMPS is the mean forward speed, m/s.
	MeanSpeedMPS float64 `json:"mean_speed_mps"`
	// PeakFrictionUtilization is the largest |F_t|/(μ_s N) of a stance
	// foot.
	PeakFrictionUtilization float64 `json:"peak_friction_utilization"`
	// MinNormalForceN is the least stance-foot normal force, N.
	MinNormalForceN float64 `json:"min_normal_force_n"`
	// LatencyP99US is the p99 command latency, µs; nil when not measured
	// (lockstep).
	LatencyP99US *float64 `json:"latency_p99_us,omitempty"`
	// Alarms counts alarms by kind.
	Alarms map[string]int `json:"alarms,omitempty"`
}

// ReadBaseline loads a baseline file. Tolerances it leaves out take the
// defaults, except new_alarm_kinds, which is read as written when the
// tolerances block is present. Every error wraps rig.ErrConfig: a baseline
// is configuration.
func ReadBaseline(path string) (*Baseline, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, rig.Configf("baseline %s: %v", path, err)
	}
	var raw struct {
		Tolerances *json.RawMessage `json:"tolerances"`
		Scenarios  map[string]Entry `json:"scenarios"`
	}
	if err := json.Unmarshal(b, &raw); err != nil {
		return nil, rig.Configf("baseline %s: not valid JSON: %v", path, err)
	}
	bl := &Baseline{Tolerances: DefaultTolerances, Scenarios: raw.Scenarios}
	if raw.Tolerances != nil {
		t := DefaultTolerances
		if err := json.Unmarshal(*raw.Tolerances, &t); err != nil {
			return nil, rig.Configf("baseline %s: tolerances: %v", path, err)
		}
		bl.Tolerances = t
	}
	if bl.Scenarios == nil {
		bl.Scenarios = map[string]Entry{}
	}
	return bl, nil
}

// WriteBaseline writes entries as a baseline file with the tolerances
// given (NaN figures as null, see rig.JSONSafe).
func WriteBaseline(path string, tol Tolerances, entries map[string]Entry) error {
	b, err := json.MarshalIndent(rig.JSONSafe(Baseline{Tolerances: tol, Scenarios: entries}), "", "  ")
	if err != nil {
		return err
	}
	return os.WriteFile(path, append(b, '\n'), 0o644)
}

// EntryOf turns a run summary into a baseline entry.
func EntryOf(s record.Summary) Entry {
	e := Entry{Outcome: string(s.Outcome), Steps: s.Steps, MeanSpeedMPS: s.MeanSpeedMPS,
		PeakFrictionUtilization: s.PeakFrictionUtilization, MinNormalForceN: s.MinNormalForceN, Alarms: s.Alarms}
	if s.LatencyUS != nil && !math.IsNaN(s.LatencyUS.P99) {
		p := s.LatencyUS.P99
		e.LatencyP99US = &p
	}
	return e
}

// Compare lists, in words, what got worse from want to got beyond tol; an
// empty list means no regression.
func Compare(want, got Entry, tol Tolerances) []string {
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
		kinds := make([]string, 0, len(got.Alarms))
		for k := range got.Alarms {
			kinds = append(kinds, k)
		}
		sort.Strings(kinds)
		for _, k := range kinds {
			if got.Alarms[k] > 0 && want.Alarms[k] == 0 {
				out = append(out, fmt.Sprintf("new alarm kind %s (×%d), none in the baseline", k, got.Alarms[k]))
			}
		}
	}
	return out
}

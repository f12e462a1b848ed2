package record

import (
	"encoding/json"
	"gaitrig/internal/nonfinite"
	"math"
)

// num is a float64 that survives JSON when it is not finite: NaN is written
// as null, ±Inf as the strings "+Inf" and "-Inf", and read back the same way.
// encoding/json refuses non-finite numbers, and a summary of a run without
// a single contact has a minimum normal force of +Inf.
type num float64

// MarshalJSON writes x, non-finite values as null or "±Inf".
func (x num) MarshalJSON() ([]byte, error) {
	if math.IsNaN(float64(x)) {
		return []byte("null"), nil
	}
	return nonfinite.AppendJSON(nil, float64(x), 64), nil
}

// UnmarshalJSON reads what MarshalJSON writes.
func (x *num) UnmarshalJSON(b []byte) error {
	f, err := parseJSONNumber(b)
	*x = num(f)
	return err
}

// noContact is the minimum normal force of a run in which no stance foot
// ever touched the ground (no ticks, or a walker in the air): +Inf in Go,
// null in summary.json. A reader of the file should not have to parse the
// text "+Inf" to learn that there was no contact, and null says "no value"
// in every JSON library; reading null back gives +Inf again, so a summary
// round-trips.
type noContact float64

// MarshalJSON writes +Inf (no contact) as null, NaN as null too (it never
// happens: the minimum of finite forces is finite), and other values as
// numbers.
func (x noContact) MarshalJSON() ([]byte, error) {
	f := float64(x)
	if math.IsInf(f, 1) || math.IsNaN(f) {
		return []byte("null"), nil
	}
	return num(f).MarshalJSON()
}

// UnmarshalJSON reads null as +Inf (no contact); it also accepts the
// "+Inf" text that summaries of earlier versions wrote.
func (x *noContact) UnmarshalJSON(b []byte) error {
	if string(b) == "null" {
		*x = noContact(math.Inf(1))
		return nil
	}
	f, err := parseJSONNumber(b)
	*x = noContact(f)
	return err
}

type latencyJSON struct {
	P50   num    `json:"p50"`
	P99   num    `json:"p99"`
	Max   num    `json:"max"`
	Count uint64 `json:"count,omitempty"`
}

func (l *Latency) toJSON() *latencyJSON {
	if l == nil {
		return nil
	}
	return &latencyJSON{num(l.P50), num(l.P99), num(l.Max), l.Count}
}

func (l *latencyJSON) fromJSON() *Latency {
	if l == nil {
		return nil
	}
	return &Latency{float64(l.P50), float64(l.P99), float64(l.Max), l.Count}
}

type criterionJSON struct {
	Name  string `json:"name"`
	Pass  bool   `json:"pass"`
	Value num    `json:"value"`
	Limit num    `json:"limit"`
}

// summaryJSON mirrors Summary with every float as num; keep the two in step.
type summaryJSON struct {
	Outcome                 Outcome         `json:"outcome"`
	Reason                  string          `json:"reason,omitempty"`
	Steps                   int             `json:"steps"`
	Ticks                   int64           `json:"ticks"`
	SimTimeS                num             `json:"sim_time_s"`
	WallTimeS               num             `json:"wall_time_s"`
	Alarms                  map[string]int  `json:"alarms"`
	PeakFrictionUtilization num             `json:"peak_friction_utilization"`
	MinNormalForceN         noContact       `json:"min_normal_force_n"`
	MeanSpeedMPS            num             `json:"mean_speed_mps"`
	MinKneeLockTorqueNM     *num            `json:"min_knee_lock_torque_nm,omitempty"`
	LatencyUS               *latencyJSON    `json:"latency_us"`
	JitterUS                *latencyJSON    `json:"jitter_us,omitempty"`
	DeadlineMisses          int             `json:"deadline_misses"`
	StaleCommands           uint64          `json:"stale_commands"`
	LateTicks               int             `json:"late_ticks"`
	HostStallS              num             `json:"host_stall_s"`
	LongestHostStallS       num             `json:"longest_host_stall_s"`
	Criteria                []criterionJSON `json:"criteria"`
	Caution                 string          `json:"caution"`
	ToolVersion             string          `json:"tool_version"`
}

// MarshalJSON writes the summary with non-finite numbers as null (NaN) or
// "+Inf"/"-Inf", except the minimum normal force, which is null when no
// foot touched the ground (+Inf).
func (s Summary) MarshalJSON() ([]byte, error) {
	j := summaryJSON{
		Outcome: s.Outcome, Reason: s.Reason, Steps: s.Steps, Ticks: s.Ticks,
		SimTimeS: num(s.SimTimeS), WallTimeS: num(s.WallTimeS), Alarms: s.Alarms,
		PeakFrictionUtilization: num(s.PeakFrictionUtilization),
		MinNormalForceN:         noContact(s.MinNormalForceN),
		MeanSpeedMPS:            num(s.MeanSpeedMPS),
		MinKneeLockTorqueNM:     (*num)(s.MinKneeLockTorqueNM),
		LatencyUS:               s.LatencyUS.toJSON(), JitterUS: s.JitterUS.toJSON(),
		DeadlineMisses: s.DeadlineMisses, Caution: s.Caution, ToolVersion: s.ToolVersion,
		StaleCommands: s.StaleCommands, LateTicks: s.LateTicks,
		HostStallS: num(s.HostStallS), LongestHostStallS: num(s.LongestHostStallS),
		Criteria: make([]criterionJSON, len(s.Criteria)),
	}
	if j.Alarms == nil {
		j.Alarms = map[string]int{}
	}
	for i, c := range s.Criteria {
		j.Criteria[i] = criterionJSON{c.Name, c.Pass, num(c.Value), num(c.Limit)}
	}
	return json.Marshal(j)
}

// UnmarshalJSON reads what MarshalJSON writes.
func (s *Summary) UnmarshalJSON(b []byte) error {
	var j summaryJSON
	if err := json.Unmarshal(b, &j); err != nil {
		return err
	}
	*s = Summary{
		Outcome: j.Outcome, Reason: j.Reason, Steps: j.Steps, Ticks: j.Ticks,
		SimTimeS: float64(j.SimTimeS), WallTimeS: float64(j.WallTimeS), Alarms: j.Alarms,
		PeakFrictionUtilization: float64(j.PeakFrictionUtilization),
		MinNormalForceN:         float64(j.MinNormalForceN),
		MeanSpeedMPS:            float64(j.MeanSpeedMPS),
		MinKneeLockTorqueNM:     (*float64)(j.MinKneeLockTorqueNM),
		LatencyUS:               j.LatencyUS.fromJSON(), JitterUS: j.JitterUS.fromJSON(),
		DeadlineMisses: j.DeadlineMisses, Caution: j.Caution, ToolVersion: j.ToolVersion,
		StaleCommands: j.StaleCommands, LateTicks: j.LateTicks,
		HostStallS: float64(j.HostStallS), LongestHostStallS: float64(j.LongestHostStallS),
	}
	for _, c := range j.Criteria {
		s.Criteria = append(s.Criteria, Criterion{c.Name, c.Pass, float64(c.Value), float64(c.Limit)})
	}
	return nil
}

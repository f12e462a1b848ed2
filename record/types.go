// Package record writes and reads run folders: one folder per run holding
// everything needed to understand, report and replay it.
//
// Files in a run folder:
//
//	manifest.json     what ran: scenario text and hash, plant parameters,
//	                  firmware greeting, tool version, seed, clock, host,
//	                  start time, exact initial state, telemetry columns
//	telemetry.csv     one row per tick, streamed; floats are written in the
//	                  shortest form that parses back to the same bits
//	events.jsonl      alarms and other events, one JSON object per line
//	steps.csv         one row per completed step (heel strike to heel strike)
//	summary.json      the outcome, written last and atomically
//	telemetry.parquet on request (ExportParquet), for analysis tools
//
// docs/run-folder.md describes every file, manifest field and column; it is
// generated from this package (go generate ./record). The telemetry and
// step columns are defined once, in the tables of tick.go.
//
// Telemetry is flushed at least every FlushInterval of wall time, events and
// steps at once, so a run killed with SIGKILL loses at most a fraction of a
// second of telemetry and nothing else. Readers tolerate a truncated last
// line and say how many complete rows they read.
package record

import "time"

// Fixed sizes of a telemetry row. The manifest says how many entries of each
// array are in use.
const (
	MaxQ      = 10 // generalized coordinates and velocities per row
	MaxJoints = 8  // sensed joints and torques per row
)

// File names inside a run folder.
const (
	ManifestFile  = "manifest.json"
	TelemetryFile = "telemetry.csv"
	EventsFile    = "events.jsonl"
	StepsFile     = "steps.csv"
	SummaryFile   = "summary.json"
	ParquetFile   = "telemetry.parquet"
)

// FileMode is the permission of every file in a run folder: readable by
// everyone, so a CI artifact uploader or a colleague's account can collect
// the folder; the files hold no secrets. A temporary file (which os.CreateTemp
// makes 0600) is set to it before it is renamed into place.
const FileMode = 0o644

// FlushInterval is the longest wall time telemetry rows stay buffered while
// ticks keep arriving. A SIGKILL loses at most this plus the time of one
// tick.
const FlushInterval = 50 * time.Millisecond

// Pose is the walker's outline at an instant, for stick figures: world (x,
// y) points in metres.
type Pose struct {
	Hip      [2]float64    `json:"hip"`       // hip joint
	Feet     [2][2]float64 `json:"feet"`      // contact-side bottom of each foot (left, right)
	TorsoTop [2]float64    `json:"torso_top"` // meaningful when HasTorso
	HasTorso bool          `json:"has_torso"` // the walker has a torso
}

// Step is one row of the per-step table: from one heel strike to the next.
type Step struct {
	Index           int     // step number from 1
	Stance          int     // stance leg during the step: 0 left, 1 right
	StartS          float64 // simulated time of the heel strike that began the step, s
	EndS            float64 // simulated time of the heel strike that ended it, s
	DurationS       float64 // EndS − StartS, s
	LengthM         float64 // forward distance between the two contact points, m
	SpeedMPS        float64 // LengthM / DurationS, m/s
	PeakUtilization float64 // peak friction utilization of the stance foot
	MinNormalN      float64 // least normal force of the stance foot, N
	ImpactLossJ     float64 // kinetic energy lost at the ending heel strike, J
	PosWorkJ        float64 // positive actuator work, J
	NegWorkJ        float64 // negative actuator work (≤ 0), J
	CostOfTransport float64 // positive work / (weight × length), dimensionless
	CoPTravelM      float64 // centre-of-pressure travel along the foot arc, heel to toe, m
	Pose            Pose    // pose at the ending heel strike
}

// Severity of an event.
type Severity string

// Event severities.
const (
	Info Severity = "info" // something worth knowing, not an alarm
	Warn Severity = "warn" // an alarm that does not end the run
	Trip Severity = "trip" // an alarm that e-stopped the run
)

// NoSegment is the Event.Segment value of an event not tied to a terrain
// segment.
const NoSegment = -1

// Event is one line of the event and alarm log.
type Event struct {
	Tick     int64              `json:"tick"`             // tick index
	T        float64            `json:"t_s"`              // simulated time, s
	Wall     time.Time          `json:"wall"`             // wall-clock time
	Kind     string             `json:"kind"`             // alarm kind (see docs/scenarios.md) or another event word
	Severity Severity           `json:"severity"`         // info, warn or trip
	Message  string             `json:"message"`          // a sentence a person understands
	Foot     string             `json:"foot,omitempty"`   // left or right, empty when not relevant
	Segment  int                `json:"segment"`          // terrain segment index; NoSegment (absent in the file) when not relevant
	Values   map[string]float64 `json:"values,omitempty"` // named numbers (measured value, limit, ...)
}

// Outcome of a run.
type Outcome string

// Run outcomes.
const (
	Pass    Outcome = "pass"    // every criterion met
	Fail    Outcome = "fail"    // a criterion not met
	Tripped Outcome = "tripped" // an alarm with severity trip e-stopped the run
	Aborted Outcome = "aborted" // stopped by the user (SIGINT, SIGTERM) or an error
	// Invalid: the host, not the firmware, spoiled the run (the loop was
	// stalled past the watchdog, host_stall): it says nothing about the
	// build and should be run again.
	Invalid Outcome = "invalid"
)

// Latency is a distribution summary in microseconds. With no samples
// (Count 0) the figures are NaN, written as null: nothing was measured,
// which is not a latency of zero.
type Latency struct {
	P50   float64 `json:"p50"`             // median
	P99   float64 `json:"p99"`             // 99th percentile
	Max   float64 `json:"max"`             // largest seen
	Count uint64  `json:"count,omitempty"` // samples the figures are made of (absent in folders written before it was added)
}

// Criterion is one pass criterion and how the run fared against it.
type Criterion struct {
	Name  string  `json:"name"`  // for example min_steps
	Pass  bool    `json:"pass"`  // met or not
	Value float64 `json:"value"` // what the run showed
	Limit float64 `json:"limit"` // the scenario's limit
}

// Summary is the run's result, written last to summary.json. Non-finite
// numbers are written as null and read back as NaN.
type Summary struct {
	Outcome                 Outcome        `json:"outcome"`                   // pass, fail, tripped, aborted or invalid
	Reason                  string         `json:"reason,omitempty"`          // why it failed, tripped or was aborted
	Steps                   int            `json:"steps"`                     // heel strikes completed
	Ticks                   int64          `json:"ticks"`                     // ticks run
	SimTimeS                float64        `json:"sim_time_s"`                // simulated time reached, s
	WallTimeS               float64        `json:"wall_time_s"`               // wall-clock duration of the run, s
	Alarms                  map[string]int `json:"alarms"`                    // count per alarm kind
	PeakFrictionUtilization float64        `json:"peak_friction_utilization"` // largest |F_t|/(μ_s N) of a stance foot
	MinNormalForceN         float64        `json:"min_normal_force_n"`        // least stance-foot normal force, N; null in the file (+Inf in Go) when no stance foot touched the ground, as in a run with no ticks
	MeanSpeedMPS            float64        `json:"mean_speed_mps"`            // mean forward speed over completed steps, m/s
	LatencyUS               *Latency       `json:"latency_us"`                // command round trip, µs, in wall-clock mode; null in lockstep
	JitterUS                *Latency       `json:"jitter_us,omitempty"`       // tick start jitter, µs, in wall-clock mode; left out in lockstep
	DeadlineMisses          int            `json:"deadline_misses"`           // wall-clock ticks that started late
	StaleCommands           uint64         `json:"stale_commands"`            // commands superseded before they were applied (answers to resent or older states, floods): counted, never in the latency figures
	LateTicks               int            `json:"late_ticks"`                // wall-clock ticks that started a whole period or more after they were due
	HostStallS              float64        `json:"host_stall_s"`              // time the loop itself was not running (the host stalled it), s, summed over stalls longer than the detection threshold
	LongestHostStallS       float64        `json:"longest_host_stall_s"`      // the longest such stall, s
	Criteria                []Criterion    `json:"criteria"`                  // each pass criterion and its result
	Caution                 string         `json:"caution"`                   // the safety caution
	ToolVersion             string         `json:"tool_version"`              // gaitrig version

	// MinKneeLockTorqueNM is the least torque the stop or latch of a locked
	// knee applied while its foot was on the ground, N·m: how close a stance
	// knee came to buckling (negative: a latch pulled). Left out for a
	// walker without knees.
	MinKneeLockTorqueNM *float64 `json:"min_knee_lock_torque_nm,omitempty"`
}

// Caution is the safety caution: the one wording that summary.json, every
// report, the reference pages and the command line carry.
const Caution = "A passing simulation is not a safety certificate: it shows how a model of the walker " +
	"behaved against this firmware and says nothing certain about the real machine. " +
	"Treadmill and overground trials need the lab's own safety procedure, a fall-arrest harness or gantry, " +
	"a hardware e-stop within reach of the operator, and the local rules and qualified staff that govern such trials."

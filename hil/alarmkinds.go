package hil

// The alarm vocabulary of the loop: the kinds of alarm it raises, the
// severities a kind can have, the default severity of each, and the pass
// criteria a run is judged by. They live here, with the loop that acts on
// them; scenario files name them (scenarios refers to these names), and a
// run record counts them.

// Severity is what an alarm does to the run.
type Severity string

// Alarm severities a scenario can set.
const (
	SeverityWarn Severity = "warn" // logged and counted; the run goes on
	SeverityTrip Severity = "trip" // e-stop: the run ends with outcome tripped
)

// Alarm kinds. The loop raises these; a scenario sets their severities.
const (
	AlarmFrictionLimit    = "friction_limit"     // demanded friction beyond μ_s·N at a rolling foot
	AlarmLiftOff          = "lift_off"           // demanded normal force below zero
	AlarmImpactSlip       = "impact_slip"        // heel-strike impulse outside the friction cone
	AlarmFootScuff        = "foot_scuff"         // swing foot below ground mid-swing
	AlarmFall             = "fall"               // hip too low or torso beyond its angle limit
	AlarmNonFinite        = "non_finite"         // NaN or Inf in the plant state
	AlarmWatchdog         = "watchdog"           // no fresh command within watchdog_ms
	AlarmBadFrame         = "bad_frame"          // a frame failed its CRC, framing or layout check
	AlarmBadTorque        = "bad_torque"         // a commanded torque is NaN or Inf
	AlarmTorqueSaturation = "torque_saturation"  // a commanded torque beyond its limit
	AlarmLinkLost         = "link_lost"          // the link to the firmware went away
	AlarmLinkRestored     = "link_restored"      // the link came back
	AlarmDeadlineMiss     = "deadline_miss"      // a wall-clock tick started late
	AlarmFirmwareFault    = "firmware_fault"     // the firmware set its fault status bit
	AlarmVersionMismatch  = "version_mismatch"   // the firmware speaks another protocol version
	AlarmActuatorMismatch = "actuator_mismatch"  // the greeting's actuator count is not the walker's joint count
	AlarmFirmwareReset    = "firmware_reset"     // the firmware greeted again after its first command: it restarted
	AlarmFirmwareSafeMode = "firmware_safe_mode" // the firmware set its safe-mode status bit
	AlarmBrokerRefusal    = "broker_refusal"     // the embedded broker refused a connection, publish or subscription
	AlarmBeltEndNear      = "belt_end_near"      // the hip or a foot within the belt's end margin of a belt end
	AlarmBeltEndPassed    = "belt_end_passed"    // the hip or a foot beyond an end of the belt: off the treadmill
	AlarmHarnessCaught    = "harness_caught"     // the fall-arrest harness caught the walker (value: peak rope force, N)
	AlarmHostStall        = "host_stall"         // the rig itself was not running (host load) for as long as the watchdog
	AlarmKneeBuckle       = "knee_buckle"        // a stance knee without a latch would need its stop to pull: it buckles
)

// AlarmKinds lists every alarm kind in a fixed order (for tables and
// reports).
var AlarmKinds = []string{
	AlarmFrictionLimit, AlarmLiftOff, AlarmImpactSlip, AlarmFootScuff,
	AlarmFall, AlarmNonFinite, AlarmWatchdog, AlarmBadFrame, AlarmBadTorque,
	AlarmTorqueSaturation, AlarmLinkLost, AlarmLinkRestored,
	AlarmDeadlineMiss, AlarmFirmwareFault, AlarmVersionMismatch,
	AlarmActuatorMismatch, AlarmFirmwareReset, AlarmFirmwareSafeMode,
	AlarmBrokerRefusal,
	AlarmBeltEndNear, AlarmBeltEndPassed, AlarmHarnessCaught, AlarmHostStall,
	AlarmKneeBuckle,
}

// DefaultSeverity is the severity of each alarm kind when a scenario does
// not set it. Physical danger and a controller the rig cannot trust trip;
// conditions the run survives warn.
var DefaultSeverity = map[string]Severity{
	AlarmFrictionLimit:    SeverityTrip,
	AlarmLiftOff:          SeverityTrip,
	AlarmImpactSlip:       SeverityWarn,
	AlarmFootScuff:        SeverityWarn,
	AlarmFall:             SeverityTrip,
	AlarmNonFinite:        SeverityTrip,
	AlarmWatchdog:         SeverityTrip,
	AlarmBadFrame:         SeverityWarn,
	AlarmBadTorque:        SeverityTrip,
	AlarmTorqueSaturation: SeverityWarn,
	AlarmLinkLost:         SeverityWarn, // the watchdog e-stops if the gap outlasts it
	AlarmLinkRestored:     SeverityWarn,
	AlarmDeadlineMiss:     SeverityWarn,
	AlarmFirmwareFault:    SeverityTrip,
	AlarmVersionMismatch:  SeverityTrip,
	// A firmware that drives another number of joints cannot run this
	// walker at all: the run is refused before its first tick.
	AlarmActuatorMismatch: SeverityTrip,
	// A board that reset mid-run lost its controller state; torques from it
	// cannot be trusted to continue the gait.
	AlarmFirmwareReset: SeverityTrip,
	// A buckling stance knee drops the walker as surely as a lifting foot
	// (lift_off trips too).
	AlarmKneeBuckle: SeverityTrip,
	// The firmware says it is in its own safe mode: worth a line in the
	// record, but it keeps answering and the rig applies what it sends.
	AlarmFirmwareSafeMode: SeverityWarn,
	// Refusals are a misconfigured board or an intrusion attempt: a trace
	// in the record, not a reason to stop a walking run.
	AlarmBrokerRefusal: SeverityWarn,
	// Treadmill (treadmill.go): near an end the firmware still has room to
	// act; past it the walker is off the belt; a caught fall ends a trial.
	AlarmBeltEndNear:   SeverityWarn,
	AlarmBeltEndPassed: SeverityTrip,
	AlarmHarnessCaught: SeverityTrip,
	AlarmHostStall:     SeverityTrip, // ends the run as invalid, not tripped: see runner.hostStall
}

// Criteria are the pass criteria of a run. A criterion left out (nil) is
// not checked. The yaml tags are the scenario file's spelling: the
// scenario loader decodes the pass block straight into this type.
type Criteria struct {
	// MinSteps is the least number of heel strikes a passing run completes.
	// Default 0 (not checked); ≥ 0.
	MinSteps int `yaml:"min_steps"`
	// NoTrip true fails a run that tripped. Default true.
	NoTrip *bool `yaml:"no_trip"`
	// MinSpeedMPS is the lowest mean forward speed of a passing run, m/s.
	MinSpeedMPS *float64 `yaml:"min_speed_mps"`
	// MaxSpeedMPS is the highest mean forward speed of a passing run, m/s;
	// ≥ min_speed_mps.
	MaxSpeedMPS *float64 `yaml:"max_speed_mps"`
	// MaxFrictionUtilization is the ceiling on the peak friction
	// utilization |F_t|/(μ_s·N) over the run; 0 < value ≤ 1 is the useful
	// range, and 1 is the slip limit itself.
	MaxFrictionUtilization *float64 `yaml:"max_friction_utilization"`
	// MinNormalForceN is the least normal force a stance foot may see, N
	// (a margin before lift-off); ≥ 0.
	MinNormalForceN *float64 `yaml:"min_normal_force_n"`
	// MaxLatencyP99US is the ceiling on the 99th percentile of command
	// round-trip latency, µs; > 0. Checked in wall-clock mode only.
	MaxLatencyP99US *float64 `yaml:"max_latency_p99_us"`
}

// Kinds of the faults that are not on the link (a scenario's faults block
// names them beside the LinkFaultKind values): a frozen sensor (Freeze)
// and a push on the hip (Push).
const (
	FaultFreeze = "freeze" // a sensor holds its value from at_s for for_s
	FaultPush   = "push"   // a push on the hip
)

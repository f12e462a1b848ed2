// Package scenarios holds the scenario schema, its strict YAML loader and the
// built-in scenario library.
//
// A scenario is one YAML file that says which walker to simulate, on which
// ground, against which controller link, for how long, with which sensor and
// actuator models and injected faults, which alarms trip the run and what a
// passing run must show. Units live in the field names (SI: _m, _kg, _s, _ms,
// _rad, _radps, _n, _nm, ...), so a value is never ambiguous.
//
// Loading is strict: an unknown field, a wrong type, a missing required value
// or an out-of-range number is an error that names the file, the line, the
// field path and what is allowed. Defaults are filled in by the loader and
// documented in docs/scenarios.md, a page generated from this file (see
// reference_test.go).
package scenarios

import "gaitrig/hil"

// Scenario is one complete, validated test scenario. The zero value is not
// useful: get one from Load, Parse or LoadBuiltin, which fill in defaults and
// validate everything.
type Scenario struct {
	// Name is a short identifier of the scenario: letters, digits, '-' and
	// '_' only, because it becomes part of run-folder and JUnit names.
	// Required.
	Name string `yaml:"name"`
	// Description says in a sentence or two what the scenario exercises.
	Description string `yaml:"description"`
	// Plant is the walker: masses, lengths, inertias, feet, optional torso.
	Plant Plant `yaml:"plant"`
	// Terrain is the ground the walker walks on.
	Terrain Terrain `yaml:"terrain"`
	// Initial is the state the run starts from.
	Initial Initial `yaml:"initial"`
	// Controller says which firmware drives the walker and over which link.
	Controller Controller `yaml:"controller"`
	// Clock says how ticks are paced.
	Clock Clock `yaml:"clock"`
	// Run says how long the run lasts. At least one of duration_s and
	// max_steps is required.
	Run RunLength `yaml:"run"`
	// WatchdogMS is how long the rig waits without a fresh command before it
	// raises the watchdog alarm and e-stops, in milliseconds. Ignored when
	// controller.link is none. Default 50 ms: fifty ticks at 1 kHz, long
	// enough for a scheduler hiccup on a bench PC, short enough that a stalled
	// board is caught within a fraction of a step (our choice).
	WatchdogMS float64 `yaml:"watchdog_ms"`
	// Physics says what the plant does after a contact alarm.
	Physics Physics `yaml:"physics"`
	// Sensors is the model of what the board's sensors read.
	Sensors Sensors `yaml:"sensors"`
	// Actuators is the model of the motors that apply the commanded torques.
	Actuators Actuators `yaml:"actuators"`
	// Faults are disturbances and link faults injected during the run.
	Faults []Fault `yaml:"faults"`
	// Alarms maps an alarm kind (see AlarmKinds) to its severity, warn or
	// trip. Kinds not listed keep their default (see DefaultSeverity);
	// after loading, the map holds every kind.
	Alarms map[string]Severity `yaml:"alarms"`
	// Pass lists the criteria a run must meet to pass.
	Pass Criteria `yaml:"pass"`
	// Margins chooses the axes of `gaitrig margins` and the minima a lab
	// requires of them (the preflight gate checks those).
	Margins Margins `yaml:"margins"`
	// Harness is the overhead fall-arrest harness. Optional; without it a
	// fall ends the run as the fall alarm says.
	Harness *Harness `yaml:"harness"`

	// File is the path or name the scenario was loaded from (not a YAML
	// field).
	File string `yaml:"-"`
	// Text is the exact bytes of the scenario file (not a YAML field); the
	// run manifest stores it with its Hash.
	Text []byte `yaml:"-"`
}

// Plant describes the walker. Both legs share one block; left and right may
// override single values of it.
type Plant struct {
	// GravityMPS2 is the gravitational acceleration, m/s². Default 9.81
	// (standard gravity is 9.80665 m/s², CGPM 1901; 9.81 is the usual
	// rounded value, common practice); 0 < gravity_mps2 ≤ 100.
	GravityMPS2 float64 `yaml:"gravity_mps2"`
	// HipMassKG is the point mass at the hip (pelvis), kg. Required;
	// 0 ≤ hip_mass_kg ≤ 10000.
	HipMassKG float64 `yaml:"hip_mass_kg"`
	// Legs is the leg both legs share. Required.
	Legs Legs `yaml:"legs"`
	// Torso is the optional torso link on the hip; omit it for a compass
	// walker with a single hip joint.
	Torso *Torso `yaml:"torso"`
}

// Leg holds the parameters of one leg with its rigid circular-arc foot.
type Leg struct {
	// LengthM is the distance from the hip to the bottom of the foot with
	// the leg vertical (with a shank: from the hip to the knee), m.
	// Required; 0 < length_m ≤ 10.
	LengthM float64 `yaml:"length_m"`
	// MassKG is the leg mass (with a shank: the thigh's), kg.
	// 0 ≤ mass_kg ≤ 10000; 0 makes a massless leg (then inertia_kgm2 must
	// be > 0).
	MassKG float64 `yaml:"mass_kg"`
	// COMM is the distance of the leg's centre of mass from the hip along
	// the leg axis, m. 0 ≤ com_m ≤ length_m.
	COMM float64 `yaml:"com_m"`
	// InertiaKGM2 is the leg's moment of inertia about its centre of mass,
	// kg·m². 0 ≤ inertia_kgm2 ≤ 10000.
	InertiaKGM2 float64 `yaml:"inertia_kgm2"`
	// FootRadiusM is the radius of the foot arc, m. 0 is a point foot;
	// 0 ≤ foot_radius_m ≤ length_m. About 0.3 × leg length matches the
	// roll-over shape of human feet (Hansen, Childress, Knox 2004, J. Biomech.
	// 37:1467–1474, from memory).
	FootRadiusM float64 `yaml:"foot_radius_m"`
	// ArcOffsetM is the fore–aft offset of the foot-arc centre from the leg
	// axis, m, positive forward. |arc_offset_m| ≤ length_m.
	ArcOffsetM float64 `yaml:"arc_offset_m"`
	// Shank gives the leg a knee: length_m, mass_kg, com_m and inertia_kgm2
	// above then describe the thigh (hip to knee), and the foot
	// (foot_radius_m, arc_offset_m) is fixed to the shank, whose length
	// bounds them instead of length_m. Optional; omit it for a straight
	// leg.
	Shank *Shank `yaml:"shank"`
}

// Shank is the lower leg of a leg with a knee, hinged at the thigh's end.
// The knee angle is the shank's angle minus the thigh's: 0 with the leg
// straight, which is the knee's stop (a knee cannot hyperextend), and
// negative when the knee flexes. An actuated knee is a joint knee_left or
// knee_right after the hips; its torque limit is
// actuators.joint_torque_limits_nm.knee_left (or knee_right), and
// actuators.torque_limit_nm otherwise.
type Shank struct {
	// LengthM is the distance from the knee to the bottom of the foot along
	// the shank, m. Required; 0 < length_m ≤ 10.
	LengthM float64 `yaml:"length_m"`
	// MassKG is the shank mass (with the foot), kg. 0 ≤ mass_kg ≤ 10000.
	MassKG float64 `yaml:"mass_kg"`
	// COMM is the distance of the shank's centre of mass from the knee
	// along the shank, m. 0 ≤ com_m ≤ length_m.
	COMM float64 `yaml:"com_m"`
	// InertiaKGM2 is the shank's moment of inertia about its centre of
	// mass, kg·m². 0 ≤ inertia_kgm2 ≤ 10000; mass_kg·com_m² +
	// inertia_kgm2 must be > 0.
	InertiaKGM2 float64 `yaml:"inertia_kgm2"`
	// KneeActuated gives the knee a torque actuator (a joint knee_left or
	// knee_right the controller drives). Default false: a passive knee
	// with its stop only.
	KneeActuated bool `yaml:"knee_actuated"`
	// KneeLatch holds the knee at its stop with torque of either sign: it
	// engages when the knee strikes its stop and at the leg's heel strike,
	// and releases when the foot leaves the ground. Default false: the stop
	// only pushes, and a stance knee whose stop would have to pull buckles
	// (the knee_buckle alarm).
	KneeLatch bool `yaml:"knee_latch"`
	// KneeStopRad is the knee angle at the knee's stop, rad (knee angle =
	// shank angle − thigh angle): the knee cannot extend beyond it, a
	// locked knee holds it, and the knee strikes when it reaches it.
	// Default 0, the straight leg; negative stops the knee slightly
	// flexed, positive lets it hyperextend. |knee_stop_rad| < π/2.
	KneeStopRad float64 `yaml:"knee_stop_rad"`
}

// ShankOverride replaces single values of the shared shank for one side. A
// field left out keeps the shared value.
type ShankOverride struct {
	// LengthM overrides legs.shank.length_m, m.
	LengthM *float64 `yaml:"length_m"`
	// MassKG overrides legs.shank.mass_kg, kg.
	MassKG *float64 `yaml:"mass_kg"`
	// COMM overrides legs.shank.com_m, m.
	COMM *float64 `yaml:"com_m"`
	// InertiaKGM2 overrides legs.shank.inertia_kgm2, kg·m².
	InertiaKGM2 *float64 `yaml:"inertia_kgm2"`
	// KneeActuated overrides legs.shank.knee_actuated.
	KneeActuated *bool `yaml:"knee_actuated"`
	// KneeLatch overrides legs.shank.knee_latch.
	KneeLatch *bool `yaml:"knee_latch"`
	// KneeStopRad overrides legs.shank.knee_stop_rad, rad.
	KneeStopRad *float64 `yaml:"knee_stop_rad"`
}

// LegOverride replaces single values of the shared leg for one side. A field
// left out keeps the shared value.
type LegOverride struct {
	// LengthM overrides legs.length_m, m.
	LengthM *float64 `yaml:"length_m"`
	// MassKG overrides legs.mass_kg, kg.
	MassKG *float64 `yaml:"mass_kg"`
	// COMM overrides legs.com_m, m.
	COMM *float64 `yaml:"com_m"`
	// InertiaKGM2 overrides legs.inertia_kgm2, kg·m².
	InertiaKGM2 *float64 `yaml:"inertia_kgm2"`
	// FootRadiusM overrides legs.foot_radius_m, m.
	FootRadiusM *float64 `yaml:"foot_radius_m"`
	// ArcOffsetM overrides legs.arc_offset_m, m.
	ArcOffsetM *float64 `yaml:"arc_offset_m"`
	// Shank overrides values of legs.shank, which must be given.
	Shank *ShankOverride `yaml:"shank"`
}

// Legs is the shared leg block with optional per-side overrides.
type Legs struct {
	// Leg holds the shared values; its fields sit directly in the legs
	// block.
	Leg `yaml:",inline"`
	// Left overrides values of the shared leg for the left leg (leg 0).
	Left *LegOverride `yaml:"left"`
	// Right overrides values of the shared leg for the right leg (leg 1).
	Right *LegOverride `yaml:"right"`
}

// Torso is the optional torso link, hinged at the hip and pointing up.
type Torso struct {
	// MassKG is the torso mass, kg. Required; 0 ≤ mass_kg ≤ 10000.
	MassKG float64 `yaml:"mass_kg"`
	// COMM is the distance of the torso's centre of mass above the hip
	// along the torso axis, m. 0 ≤ com_m ≤ 10.
	COMM float64 `yaml:"com_m"`
	// InertiaKGM2 is the torso's moment of inertia about its centre of
	// mass, kg·m². 0 ≤ inertia_kgm2 ≤ 10000; mass_kg·com_m² + inertia_kgm2
	// must be > 0.
	InertiaKGM2 float64 `yaml:"inertia_kgm2"`
}

// Terrain is a polyline of straight segments starting at Start. Ground past
// the last segment continues the last segment.
type Terrain struct {
	// StartM is the world point (x, y) where the first segment begins, m.
	// Default [-1, 0]: one metre behind the origin, so a walker standing at
	// x = 0 is on the first segment.
	StartM [2]float64 `yaml:"start_m"`
	// Segments are the pieces of ground in walking order. Required, at least
	// one.
	Segments []Segment `yaml:"segments"`
}

// Segment is one straight piece of ground.
type Segment struct {
	// LengthM is the length of the segment along its surface, m. Required;
	// 0 < length_m ≤ 100000.
	LengthM float64 `yaml:"length_m"`
	// SlopeRad is the slope, rad, positive uphill in the walking direction.
	// |slope_rad| < π/2.
	SlopeRad float64 `yaml:"slope_rad"`
	// MuStatic is the static friction coefficient. Required;
	// 0 < mu_static ≤ 10.
	MuStatic float64 `yaml:"mu_static"`
	// MuKinetic is the kinetic (sliding) friction coefficient. Default
	// 0.8 × mu_static (a typical ratio, common practice);
	// 0 ≤ mu_kinetic ≤ mu_static.
	MuKinetic float64 `yaml:"mu_kinetic"`
	// Belt makes this segment a treadmill belt: its surface runs along the
	// segment with the speed profile given, and the segment's length is the
	// belt's length. At most one segment is a belt. Optional.
	Belt *Belt `yaml:"belt"`
}

// Belt is a treadmill belt: its speed profile (exactly one of speed_mps,
// ramp and points, plus any pulses), where the walker starts on it, and
// how close to an end the walker may come before the belt_end_near alarm.
// Speeds are positive when the surface runs backward, as a treadmill runs
// under a walker facing forward. The walker's initial rates are relative
// to the belt surface.
type Belt struct {
	// SpeedMPS is a constant belt speed, m/s; |speed_mps| ≤ 20.
	SpeedMPS *float64 `yaml:"speed_mps"`
	// Ramp changes the speed linearly between two times.
	Ramp *BeltRamp `yaml:"ramp"`
	// Points are (time, speed) corners joined by straight lines, the speed
	// held before the first and after the last; at least one, times
	// strictly increasing.
	Points []BeltPoint `yaml:"points"`
	// Pulses are perturbations added to the profile: a change of speed
	// over rise_s, held for hold_s, back over fall_s, at a time or at a
	// phase of a step.
	Pulses []BeltPulse `yaml:"pulses"`
	// StartM is where the walker starts on the belt: the distance from the
	// belt's rear end, along the belt, of the point initial.x_m would give
	// (the rig stands the walker there), m, 0 < start_m < the segment's
	// length_m.
	// Default the middle of the belt when initial.x_m is not given either;
	// when given it overrides initial.x_m.
	StartM *float64 `yaml:"start_m"`
	// EndMarginM is how close the hip or a foot may come to either end of
	// the belt before belt_end_near is raised, m. Default 0.3
	// (hil.DefaultEndMargin); 0 < end_margin_m < half the belt.
	EndMarginM float64 `yaml:"end_margin_m"`
}

// BeltRamp is a linear change of belt speed from from_mps at start_s to
// to_mps at end_s; the speed is held before and after.
type BeltRamp struct {
	// FromMPS is the speed before start_s, m/s. Required.
	FromMPS float64 `yaml:"from_mps"`
	// ToMPS is the speed after end_s, m/s. Required.
	ToMPS float64 `yaml:"to_mps"`
	// StartS is when the ramp begins, s. Default 0.
	StartS float64 `yaml:"start_s"`
	// EndS is when it ends, s. Required; end_s > start_s.
	EndS float64 `yaml:"end_s"`
}

// BeltPoint is one (time, speed) corner of a belt profile.
type BeltPoint struct {
	// TS is the time, s. Required.
	TS float64 `yaml:"t_s"`
	// SpeedMPS is the belt speed at t_s, m/s. Required; |speed_mps| ≤ 20.
	SpeedMPS float64 `yaml:"speed_mps"`
}

// BeltPulse is a belt perturbation as gait labs apply them, for example
// +0.5 m/s in 150 ms at early stance of step 12: delta_mps: 0.5,
// rise_s: 0.15, at_step: 12, phase: 0.1.
type BeltPulse struct {
	// AtS starts the pulse at a time, s. A pulse needs at_s or at_step.
	AtS float64 `yaml:"at_s"`
	// AtStep starts the pulse at the heel strike that completes this step
	// (plus phase × that step's duration). ≥ 1 when given.
	AtStep int `yaml:"at_step"`
	// Phase delays an at_step pulse by this fraction of the step that just
	// ended, 0 ≤ phase < 1 (0.1: early stance). Only with at_step.
	Phase float64 `yaml:"phase"`
	// DeltaMPS is the change of speed, m/s; positive speeds the belt up.
	// Required; 0 < |delta_mps| ≤ 10.
	DeltaMPS float64 `yaml:"delta_mps"`
	// RiseS is the time to reach delta_mps, s. Required; 0 < rise_s ≤ 10.
	RiseS float64 `yaml:"rise_s"`
	// HoldS is the time at the changed speed, s. Default 0; 0 ≤ hold_s ≤ 3600.
	HoldS float64 `yaml:"hold_s"`
	// FallS is the time to return to the profile, s. Default rise_s;
	// 0 < fall_s ≤ 10.
	FallS float64 `yaml:"fall_s"`
}

// Harness is the overhead fall-arrest harness every treadmill trial uses:
// a rope from a fixed point above the hip's initial position with some
// slack, modelled as a stiff, damped, one-sided spring (see hil.Harness).
// A caught fall raises harness_caught with the peak rope force; whether a
// catch ends the run is that alarm's severity (default trip: the trial
// stops; set alarms.harness_caught: warn to go on).
type Harness struct {
	// AnchorHeightM is the height of the rope's fixed point above the hip's
	// initial position, m. Default 2; 0 < anchor_height_m ≤ 10. With drop_m
	// it sets how far the walker may also move fore and aft before the
	// rope goes taut: √((h + drop)² − h²), 0.92 m with the defaults.
	AnchorHeightM float64 `yaml:"anchor_height_m"`
	// DropM is how far the hip may drop below its initial height before
	// the rope goes taut, m (the slack). Default 0.2; 0 < drop_m ≤ 2.
	DropM float64 `yaml:"drop_m"`
	// StiffnessNPM is the rope's stiffness, N/m. Default 20000
	// (hil.DefaultRopeStiffness); 0 < stiffness_npm ≤ 1e7.
	StiffnessNPM float64 `yaml:"stiffness_npm"`
	// DampingNSPM is the rope's damping, N·s/m. Default 750
	// (hil.DefaultRopeDamping); 0 ≤ damping_nspm ≤ 1e6.
	DampingNSPM float64 `yaml:"damping_nspm"`
}

// Initial is the initial state: either explicit, or the natural gait found by
// the gait finder.
type Initial struct {
	// NaturalGait true starts the run from the period-one gait that the gait
	// finder finds for this walker and controller, just after a heel strike.
	// The explicit fields below are then optional and, when given, are the
	// guess the gait finder starts from.
	NaturalGait bool `yaml:"natural_gait"`
	// Stance is the leg in contact at the start: left or right. Default
	// left.
	Stance string `yaml:"stance"`
	// XM is the forward position of the stance foot's contact point, m.
	// Default 0.
	XM float64 `yaml:"x_m"`
	// LegAnglesRad are the absolute angles of the left and right leg from the
	// vertical, rad, counter-clockwise positive (positive puts the foot ahead
	// of the hip). Required unless natural_gait is true; |angle| < π/2.
	LegAnglesRad []float64 `yaml:"leg_angles_rad"`
	// TorsoAngleRad is the absolute torso angle from the vertical, rad;
	// forward lean is negative. Default 0.
	TorsoAngleRad float64 `yaml:"torso_angle_rad"`
	// LegRatesRadps are the absolute angular rates of the left and right
	// leg, rad/s. Default [0, 0].
	LegRatesRadps []float64 `yaml:"leg_rates_radps"`
	// TorsoRateRadps is the torso's absolute angular rate, rad/s. Default 0.
	TorsoRateRadps float64 `yaml:"torso_rate_radps"`
}

// Link kinds for Controller.Link.
const (
	LinkBuiltin = "builtin" // the in-process reference controller
	LinkSerial  = "serial"  // a board on a serial port
	LinkMQTT    = "mqtt"    // a controller process over MQTT
	LinkNone    = "none"    // no controller: zero torques, a passive walker
)

// Controller says which controller drives the walker and how the rig reaches
// it. Secrets never appear in a scenario: username_env and password_env name
// environment variables that hold them.
type Controller struct {
	// Link is builtin, serial, mqtt or none. Required.
	Link string `yaml:"link"`
	// Mode is the built-in controller's mode: walk, or passive (the
	// controller answers every state with zero torques, so the link and
	// watchdog are exercised on a passive walker). Default walk. Only for
	// link builtin.
	Mode string `yaml:"mode"`
	// Settings are named tuning values for the built-in controller (for
	// example target_speed_mps); their names and meaning belong to the
	// reference controller. Only for link builtin.
	Settings map[string]float64 `yaml:"settings"`
	// Port is the serial device, for example /dev/ttyUSB0. Required for
	// link serial.
	Port string `yaml:"port"`
	// Baud is the serial baud rate. Default 115200 (a common default of USB
	// serial adapters, common practice). Only for link serial.
	Baud int `yaml:"baud"`
	// Broker is the MQTT broker URL (tcp://host:port, ssl://host:port) or
	// the word embedded for the broker built into gaitrig. Default embedded.
	// Only for link mqtt.
	Broker string `yaml:"broker"`
	// Rig is the rig id that names this rig's MQTT topic tree. Default
	// bench. Only for link mqtt.
	Rig string `yaml:"rig"`
	// UsernameEnv names the environment variable that holds the MQTT user
	// name. Only for link mqtt.
	UsernameEnv string `yaml:"username_env"`
	// PasswordEnv names the environment variable that holds the MQTT
	// password. Only for link mqtt. A literal password field is an error:
	// scenario files are shared, hashed and copied into every run record.
	PasswordEnv string `yaml:"password_env"`
}

// Clock modes for Clock.Mode: the loop's own (hil.ClockMode).
const (
	ClockLockstep  = string(hil.Lockstep)  // virtual time: the plant waits for each reply
	ClockWallclock = string(hil.Wallclock) // ticks paced by the real clock
)

// Clock says how the loop paces its ticks.
type Clock struct {
	// Mode is lockstep (virtual time, bit-identical logs) or wallclock
	// (paced by the real clock). Default lockstep.
	Mode string `yaml:"mode"`
	// TickHz is the control rate, ticks per second. Default 1000;
	// 10 ≤ tick_hz ≤ 20000.
	TickHz float64 `yaml:"tick_hz"`
	// Substeps is the number of integrator steps per tick. Default 1
	// (the plant's accuracy budget: one RK4 step per 1 ms tick);
	// 1 ≤ substeps ≤ 100.
	Substeps int `yaml:"substeps"`
}

// RunLength bounds the run. The run ends at whichever limit comes first.
type RunLength struct {
	// DurationS is the simulated duration, s. > 0 when given.
	DurationS float64 `yaml:"duration_s"`
	// MaxSteps ends the run after this many heel strikes. > 0 when given.
	MaxSteps int `yaml:"max_steps"`
}

// Contact-alarm policies for Physics.OnSlip and Physics.OnLiftOff.
const (
	PolicyContinue = "continue" // keep integrating with the changed contact
	PolicyStop     = "stop"     // stop the plant at the event
)

// Physics says what the plant does after a contact event. Whether the run
// trips is the alarm severity's business (see Alarms); these options say
// whether the physics carries on.
type Physics struct {
	// OnSlip is continue (the foot slides with kinetic friction) or stop.
	// Default continue.
	OnSlip string `yaml:"on_slip"`
	// OnLiftOff is continue (the foot leaves the ground) or stop. Default
	// continue.
	OnLiftOff string `yaml:"on_lift_off"`
	// IgnoreScuff true lets the swing foot pass through the ground mid-swing
	// without a foot_scuff event, as the simplest walking models assume.
	// Default false.
	IgnoreScuff bool `yaml:"ignore_scuff"`
	// FallHipHeightM is the hip height above the ground below which the
	// walker has fallen, m. 0 (the default) means half the shorter leg
	// length; a negative value turns the check off. |fall_hip_height_m| ≤ 10.
	FallHipHeightM float64 `yaml:"fall_hip_height_m"`
	// FallTorsoAngleRad is the torso angle from the vertical beyond which the
	// walker has fallen, rad. Default 1.2 rad (about 69°, our choice);
	// 0 < fall_torso_angle_rad ≤ π.
	FallTorsoAngleRad float64 `yaml:"fall_torso_angle_rad"`
}

// Sensors models what the board's encoders, IMU and foot switches read.
type Sensors struct {
	// EncoderCountsPerRev is the joint encoder resolution in counts per
	// revolution; angles are quantized to it. 0 means no quantization.
	// Default 4096 (a 12-bit encoder, common practice); 0 ≤ value ≤ 2^24.
	EncoderCountsPerRev int `yaml:"encoder_counts_per_rev"`
	// AngleNoiseRad is the standard deviation of white noise on joint
	// angles, rad. Default 0; ≥ 0.
	AngleNoiseRad float64 `yaml:"angle_noise_rad"`
	// RateNoiseRadps is the standard deviation of white noise on joint
	// rates, rad/s. Default 0; ≥ 0.
	RateNoiseRadps float64 `yaml:"rate_noise_radps"`
	// AngleBiasRad is a constant offset added to every joint angle, rad.
	// Default 0.
	AngleBiasRad float64 `yaml:"angle_bias_rad"`
	// RateBiasRadps is a constant offset added to every joint rate, rad/s.
	// Default 0.
	RateBiasRadps float64 `yaml:"rate_bias_radps"`
	// IMUPitchNoiseRad is the standard deviation of noise on the IMU pitch,
	// rad. Default 0; ≥ 0.
	IMUPitchNoiseRad float64 `yaml:"imu_pitch_noise_rad"`
	// IMURateNoiseRadps is the standard deviation of noise on the IMU pitch
	// rate, rad/s. Default 0; ≥ 0.
	IMURateNoiseRadps float64 `yaml:"imu_rate_noise_radps"`
	// IMUPitchBiasRad is a constant offset on the IMU pitch, rad. Default 0.
	IMUPitchBiasRad float64 `yaml:"imu_pitch_bias_rad"`
	// IMURateBiasRadps is a constant offset on the IMU rate, rad/s. Default
	// 0.
	IMURateBiasRadps float64 `yaml:"imu_rate_bias_radps"`
	// ContactThresholdN is the normal force above which a foot switch reads
	// closed, N. Default 5 N (our choice); ≥ 0.
	ContactThresholdN float64 `yaml:"contact_threshold_n"`
	// Seed seeds the random generator of sensor noise and of random fault
	// injection (drops, corruption, jitter), so a run is repeatable. Default
	// 1.
	Seed int64 `yaml:"seed"`
}

// Actuators models the motors between the commanded and the applied torque.
type Actuators struct {
	// TorqueLimitNM is the symmetric torque limit of every joint, N·m;
	// commands beyond it are saturated and raise torque_saturation. Default
	// 50 N·m (our choice for a bench-size walker); > 0.
	TorqueLimitNM float64 `yaml:"torque_limit_nm"`
	// JointTorqueLimitsNM overrides the limit for single joints, by joint
	// name (hip for a compass walker; hip_left and hip_right with a torso),
	// N·m; each > 0.
	JointTorqueLimitsNM map[string]float64 `yaml:"joint_torque_limits_nm"`
	// LagS is the time constant of a first-order lag between commanded and
	// applied torque, s. Default 0 (no lag); 0 ≤ lag_s ≤ 1.
	LagS float64 `yaml:"lag_s"`
}

// Fault kinds for Fault.Kind: the loop's own (hil), so a scenario and the
// loop cannot spell a kind two ways.
const (
	FaultLatency = string(hil.FaultLatency) // added command latency: fixed_ms + uniform jitter_ms
	FaultDrop    = string(hil.FaultDrop)    // drop frames with probability rate
	FaultCorrupt = string(hil.FaultCorrupt) // corrupt frames with probability rate
	FaultFreeze  = hil.FaultFreeze          // a sensor holds its value from at_s for for_s
	FaultPush    = hil.FaultPush            // a push on the hip
)

// Fault is one injected disturbance or link fault. Kind says which of the
// other fields apply; a field that does not apply to the kind is an error.
type Fault struct {
	// Kind is latency, drop, corrupt, freeze or push. Required.
	Kind string `yaml:"kind"`
	// FromS is when a latency, drop or corrupt fault starts, simulated
	// seconds. Default 0.
	FromS float64 `yaml:"from_s"`
	// UntilS is when a latency, drop or corrupt fault ends, simulated
	// seconds. Default 0 means until the end of the run.
	UntilS float64 `yaml:"until_s"`
	// FixedMS is the fixed added latency of a latency fault, ms. ≥ 0.
	FixedMS float64 `yaml:"fixed_ms"`
	// JitterMS is the width of uniformly distributed extra latency of a
	// latency fault, ms. ≥ 0.
	JitterMS float64 `yaml:"jitter_ms"`
	// Rate is the probability per frame of a drop or corrupt fault.
	// Required for those kinds; 0 < rate ≤ 1.
	Rate float64 `yaml:"rate"`
	// Sensor is what a freeze fault freezes: a joint name, imu, or contacts.
	// Required for freeze.
	Sensor string `yaml:"sensor"`
	// AtS is when a freeze or push fault happens, simulated seconds. A push
	// needs at_s or at_step.
	AtS float64 `yaml:"at_s"`
	// AtStep times a push at the heel strike that completes this step
	// instead of at a time. ≥ 1 when given.
	AtStep int `yaml:"at_step"`
	// ForS is how long a freeze lasts, s. Required for freeze; > 0.
	ForS float64 `yaml:"for_s"`
	// ImpulseNS is the impulse of a push as (x, y), N·s, applied over one
	// tick. A push needs impulse_ns or force_n.
	ImpulseNS []float64 `yaml:"impulse_ns"`
	// ForceN is the force of a push as (x, y), N, held for duration_s.
	ForceN []float64 `yaml:"force_n"`
	// DurationS is how long force_n is held, s. Required with force_n; > 0.
	DurationS float64 `yaml:"duration_s"`
}

// Severity is what an alarm does to the run (hil.Severity: the loop acts
// on it).
type Severity = hil.Severity

// Alarm severities a scenario can set.
const (
	SeverityWarn = hil.SeverityWarn // logged and counted; the run goes on
	SeverityTrip = hil.SeverityTrip // e-stop: the run ends with outcome tripped
)

// Alarm kinds, as the loop raises them (hil); a scenario sets their
// severities. The comments are the scenario reference's descriptions.
const (
	AlarmFrictionLimit    = hil.AlarmFrictionLimit    // demanded friction beyond μ_s·N at a rolling foot
	AlarmLiftOff          = hil.AlarmLiftOff          // demanded normal force below zero
	AlarmImpactSlip       = hil.AlarmImpactSlip       // heel-strike impulse outside the friction cone
	AlarmFootScuff        = hil.AlarmFootScuff        // swing foot below ground mid-swing
	AlarmFall             = hil.AlarmFall             // hip too low or torso beyond its angle limit
	AlarmNonFinite        = hil.AlarmNonFinite        // NaN or Inf in the plant state
	AlarmWatchdog         = hil.AlarmWatchdog         // no fresh command within watchdog_ms
	AlarmBadFrame         = hil.AlarmBadFrame         // a frame failed its CRC, framing or layout check
	AlarmBadTorque        = hil.AlarmBadTorque        // a commanded torque is NaN or Inf
	AlarmTorqueSaturation = hil.AlarmTorqueSaturation // a commanded torque beyond its limit
	AlarmLinkLost         = hil.AlarmLinkLost         // the link to the firmware went away
	AlarmLinkRestored     = hil.AlarmLinkRestored     // the link came back
	AlarmDeadlineMiss     = hil.AlarmDeadlineMiss     // a wall-clock tick started late
	AlarmFirmwareFault    = hil.AlarmFirmwareFault    // the firmware set its fault status bit
	AlarmVersionMismatch  = hil.AlarmVersionMismatch  // the firmware speaks another protocol version
)

// AlarmKinds lists every alarm kind in a fixed order (for tables and
// reports).
var AlarmKinds = hil.AlarmKinds

// DefaultSeverity is the severity of each alarm kind when a scenario does
// not set it (hil.DefaultSeverity).
var DefaultSeverity = hil.DefaultSeverity

// Criteria are the pass criteria of a run (hil.Criteria, which the loop
// evaluates). A criterion left out is not checked (except no_trip, which
// defaults to true).
type Criteria = hil.Criteria

// MarginAxes are the axes `gaitrig margins` can search, in the order it
// searches them (the batch package makes each one): the floor's friction,
// hip pushes forward and backward at early, mid and late stance, added
// command latency, slope up and down, then sensor noise, encoder resolution,
// torque limit and the plant's mass and leg length off while the firmware
// is unchanged, and on a treadmill the largest belt speed-up and slow-down
// pulse survived.
var MarginAxes = []string{"friction",
	"push_forward_early", "push_forward_mid", "push_forward_late",
	"push_backward_early", "push_backward_mid", "push_backward_late",
	"added_latency", "slope_up", "slope_down", "noise_multiple", "encoder_counts",
	"torque_fraction", "mass_plus", "mass_minus", "leg_length_plus", "leg_length_minus",
	"belt_speed_up", "belt_slow_down"} // the belt axes: treadmill scenarios only

// Margins is the scenario's margins block: which axes to search, how
// finely, and the least margin the lab requires on each. A zero minimum
// requires nothing.
type Margins struct {
	// Axes are the axes to search: friction, push_forward_early,
	// push_forward_mid, push_forward_late, push_backward_early,
	// push_backward_mid, push_backward_late, added_latency, slope_up,
	// slope_down, noise_multiple, encoder_counts, torque_fraction, mass_plus,
	// mass_minus, leg_length_plus, leg_length_minus, and on a treadmill
	// belt_speed_up, belt_slow_down (MarginAxes). Default: all (the belt
	// axes only on a treadmill).
	Axes []string `yaml:"axes"`
	// Far sets where an axis's search ends, by axis name, in the axis's
	// unit (friction: fraction of μ_s, pushes: N·s, added_latency: ms,
	// slopes: degrees, negative downhill, noise_multiple: times,
	// encoder_counts: counts per revolution, torque_fraction: fraction, mass and leg length:
	// %, negative for the minus axes); the search starts at the scenario as
	// written. Default per axis: friction 0.05, pushes 40, added_latency
	// 40, slope_up 10, slope_down -10, noise_multiple 50, encoder_counts 16,
	// torque_fraction 0.05, mass ±50, leg length ±30, belt pulses ±2 m/s.
	Far map[string]float64 `yaml:"far"`
	// Tolerance is the width the bisection stops at, as a fraction of the
	// axis's range. Default 0.02; 0 < tolerance ≤ 0.5.
	Tolerance float64 `yaml:"tolerance"`
	// MinFrictionRatio is the least ratio of the scenario's μ_s to the
	// lowest μ_s the firmware still walks on. 0 (default): no requirement;
	// otherwise ≥ 1.
	MinFrictionRatio float64 `yaml:"min_friction_ratio"`
	// MinPushNS is the least hip impulse, N·s, every push axis searched
	// must survive. 0 (default): no requirement; ≥ 0.
	MinPushNS float64 `yaml:"min_push_ns"`
	// MinAddedLatencyMS is the least added command latency, ms, the
	// firmware must survive. 0 (default): no requirement; ≥ 0.
	MinAddedLatencyMS float64 `yaml:"min_added_latency_ms"`
	// MinSlopeDeg is the least slope, degrees, up and down, the firmware
	// must walk. 0 (default): no requirement; 0 ≤ min_slope_deg < 90.
	MinSlopeDeg float64 `yaml:"min_slope_deg"`
	// MaxSpectralRadius is the largest spectral radius of the estimated
	// step-to-step map the preflight gate accepts. Default 0.9 (our choice:
	// a perturbation then loses at least 10 % a step); 0 < value ≤ 1.
	MaxSpectralRadius float64 `yaml:"max_spectral_radius"`
}

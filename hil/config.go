package hil

import (
	"errors"
	"fmt"
	"math"
	"time"

	"gaitrig/internal/hostload"
	"gaitrig/plant"
)

// ClockMode says how ticks are paced.
type ClockMode string

// Clock modes.
const (
	// Lockstep advances the plant only when the firmware's reply to the
	// current state has arrived. Time is virtual: a run gives the same
	// telemetry bit for bit every time.
	Lockstep ClockMode = "lockstep"
	// Wallclock paces ticks by the real clock; a late command is applied at
	// the next tick and a tick without one holds the last torque.
	Wallclock ClockMode = "wallclock"
)

// Defaults used when a Config field is zero.
const (
	DefaultTickHz           = 1000
	DefaultWatchdog         = 50 * time.Millisecond
	DefaultHandshakeTimeout = 5 * time.Second
	// DefaultResend is how long a lockstep rig waits for a reply before it
	// sends the same state again, so one lost frame costs a resend, not a
	// watchdog trip.
	DefaultResend = 10 * time.Millisecond
	// DefaultAlarmInterval is the least simulated time between two logged
	// alarms of one repeating kind (saturation, bad frames, deadline
	// misses); occurrences in between are counted and reported with the next
	// line, so the log stays readable and complete.
	DefaultAlarmInterval = 0.5
	// DefaultRealtimePriority is the SCHED_FIFO priority asked for in
	// wall-clock mode: mid-range of Linux's 1–99, below kernel threads that
	// run at 99 (common practice).
	DefaultRealtimePriority = 50
)

// LinkFaultKind is a fault injected on the link.
type LinkFaultKind string

// Link fault kinds.
const (
	// FaultLatency delays each command by Fixed plus a uniform random part
	// in [0, Jitter). In lockstep the delay is counted in ticks (rounded to
	// the nearest tick): the command answering tick n is applied at tick
	// n+k, and the ticks in between hold the torque before it.
	FaultLatency LinkFaultKind = "latency"
	// FaultDrop loses frames with probability Rate, states to the firmware
	// and commands from it alike. A lockstep rig resends an unanswered state
	// after Config.Resend.
	FaultDrop LinkFaultKind = "drop"
	// FaultCorrupt corrupts incoming commands with probability Rate. A
	// corrupted frame is handled as a real link's CRC check handles it:
	// rejected, counted and raised as bad_frame (CRC-16/CCITT-FALSE detects
	// every single-bit error and every burst up to 16 bits, a property of
	// CRCs of that degree, common practice). Torque bit-flips that keep the
	// CRC valid are what bad_torque tests with a firmware that sends them.
	FaultCorrupt LinkFaultKind = "corrupt"
)

// LinkFault is one fault on the link, active from From to Until simulated
// seconds (Until 0: to the end).
type LinkFault struct {
	// Kind is latency, drop or corrupt.
	Kind LinkFaultKind
	// From and Until bound the fault in simulated seconds; Until 0 keeps
	// it on to the end of the run.
	From, Until float64
	// Fixed and Jitter are a latency fault's added delay: Fixed plus a
	// uniform random part in [0, Jitter) (see FaultLatency).
	Fixed, Jitter time.Duration
	// Rate is a drop or corrupt fault's probability per frame.
	Rate float64
}

func (f *LinkFault) active(t float64) bool {
	return t >= f.From && (f.Until <= 0 || t < f.Until)
}

// EStopPolicy is what the motors do after an e-stop.
type EStopPolicy string

// E-stop policies.
const (
	EStopZero EStopPolicy = "zero" // all torques to zero
	EStopDamp EStopPolicy = "damp" // joint damping −c·rate, clipped to the torque limits
)

// Push is a disturbance on the hip: an impulse over one tick, or a force
// held for Duration. It starts at time At, or, when AtStep > 0, at the tick
// of the heel strike that completes step AtStep.
type Push struct {
	At       float64    // simulated seconds
	AtStep   int        // heel strike number; overrides At when > 0
	Impulse  [2]float64 // N·s, (x, y), spread over one tick
	Force    [2]float64 // N, (x, y), held for Duration
	Duration float64    // s
}

// Config is everything the loop needs besides the plant, the link and the
// record. The zero value of a field means its default.
type Config struct {
	// Clock is Lockstep (default) or Wallclock.
	Clock ClockMode
	// TickHz is the control rate; default 1000.
	TickHz float64
	// Physics are the plant options: sub-steps per tick and what the plant
	// does after contact events.
	Physics plant.Options
	// Watchdog is the longest time without a valid command before the
	// watchdog alarm e-stops the run; default 50 ms. It is charged only
	// with time in which the firmware could have answered: stalls of the
	// rig itself (a wait that ended more than 5 ms late; in wall-clock also
	// time the loop's thread neither ran nor slept as asked) are not
	// counted, and in wall-clock a stall as long as the watchdog ends the
	// run as invalid (host_stall). In lockstep it counts from the moment
	// the state went out, and once the answer is slow, time the host's CPUs
	// were contended is not counted either, up to 20 watchdogs (at least
	// 1 s) in all.
	Watchdog time.Duration
	// HandshakeTimeout is how long the rig waits for the firmware's
	// greeting; default 5 s.
	HandshakeTimeout time.Duration
	// Resend is the lockstep resend interval; default 10 ms.
	Resend time.Duration
	// Sensors is the sensor model.
	Sensors SensorModel
	// Freezes are frozen-sensor faults.
	Freezes []Freeze
	// Actuators is the actuator model.
	Actuators ActuatorModel
	// LinkFaults are latency, drop and corrupt faults on the link.
	LinkFaults []LinkFault
	// Pushes are disturbances on the hip.
	Pushes []Push
	// Severity sets the severity of alarm kinds; kinds not listed use
	// DefaultSeverity, and kinds unknown there warn.
	Severity map[string]Severity
	// AlarmInterval is the least simulated time between two logged alarms
	// of one kind; default DefaultAlarmInterval.
	AlarmInterval float64
	// Duration (simulated seconds) and MaxSteps end the run at whichever
	// comes first; at least one must be set.
	Duration float64
	// MaxSteps is the number of completed steps that ends the run; 0: no
	// step limit.
	MaxSteps int
	// Criteria are the pass criteria.
	Criteria Criteria
	// Seed seeds sensor noise and random faults.
	Seed int64
	// RealtimePriority is the SCHED_FIFO priority asked for in wall-clock
	// mode; default DefaultRealtimePriority; negative asks for nothing.
	RealtimePriority int
	// EStop is what the motors do after an e-stop: EStopZero (default,
	// torques to zero) or EStopDamp (each joint brakes with
	// −EStopDamping·rate, as a motor drive shorting its windings does).
	EStop EStopPolicy
	// EStopDamping is the joint damping of EStopDamp, N·m·s/rad.
	EStopDamping float64
	// EStopCoast keeps the plant running for this much simulated time after
	// an e-stop, under the e-stop policy and without the firmware, so the
	// record shows what the e-stop led to (a fall, a stop). 0 ends the run
	// at the tripping tick.
	EStopCoast float64
	// Alarms, when set, receives every logged alarm as one JSON object
	// (the MQTT link publishes it on the rig's alarm topic).
	Alarms AlarmSink
	// Notices, when set, carries refusals of the embedded broker the rig
	// started into the loop: each becomes a broker_refusal alarm, and the
	// no-greeting error counts them. Nil: no notices.
	Notices *Notices
	// OnStep, when set, is called after each completed step (a live line
	// per step on a terminal). It runs on the loop: keep it short.
	OnStep func(step StepInfo)
	// Belt drives and watches the treadmill belt (the terrain's belt
	// segment); nil without a treadmill.
	Belt *Belt
	// Harness is the overhead fall-arrest harness; nil without one (a fall
	// then ends the run as the fall alarm says).
	Harness *Harness
	// Log, when set, receives plain sentences about the run that are not
	// alarms (scheduling class granted or not, handshake).
	Log func(line string)
	// AfterHeelStrike, when set, is called on the loop at each heel strike,
	// after the tick that holds it has been stepped and recorded and after
	// OnStep, with the step number (as in steps.csv), the time of the heel
	// strike, the plant state at the end of that tick and the input held over
	// it. It may change the state: the next tick starts from it, so the
	// firmware senses the change as it would sense a real disturbance. It is
	// the hook of the stability analysis (batch.Stability), which perturbs
	// the rates there; only lockstep runs give it the same tick every time.
	// It runs inside the tick that holds the heel strike, once per step
	// (not on every tick's path, which stays allocation-free when it is
	// nil): keep it short and never block. A change is not logged by the
	// loop; the caller that makes it records it.
	AfterHeelStrike func(step int, strikeT float64, s *plant.State, in *plant.Input)

	// pressure, set by this package's tests only, replaces the host's CPU
	// pressure file, so the watchdog's credit for a contended host can be
	// tested without loading the host (and switched off for tests of a
	// silent firmware, which must not depend on the host's load).
	pressure *hostload.Pressure
	// Tap, when set, receives decimated snapshots of the loop for a live
	// view or metrics (see NewTap); the tick path neither allocates nor
	// waits for its reader.
	Tap *Tap
}

// StepInfo is what OnStep receives: the step row and the run so far.
type StepInfo struct {
	Index     int     // step number from 1, as in steps.csv
	DurationS float64 // time between the heel strikes that began and ended the step, s
	LengthM   float64 // forward distance between the two contact points, m
	SpeedMPS  float64 // LengthM / DurationS, m/s
	PeakUtil  float64 // peak friction utilization of the stance foot
	MinNormal float64 // least normal force of the stance foot, N
	SimTimeS  float64 // simulated time of the run when the step completed, s
	EndS      float64 // simulated time of the heel strike that ended the step (steps.csv end_s), s; at or before SimTimeS
}

// AlarmSink receives alarms as they are logged, as one JSON object each
// (the same object as the events.jsonl line, non-finite values as strings).
// PublishAlarm is called from a goroutine of its own, fed by a bounded
// queue, so a sink that waits for a broker never holds up a tick. A sink
// that fails or lags is noted in the run log; the run goes on, and the
// record is the authority.
type AlarmSink interface {
	// PublishAlarm sends one alarm object; each call gets a slice of its
	// own, which the sink may keep.
	PublishAlarm(jsonObject []byte) error
}

// WithDefaults returns c with its zero fields set to their defaults, or an
// error naming the first field that makes no sense. Run calls it; callers
// that build a manifest or show the configuration before the run call it
// to see the values the run will use.
func (c Config) WithDefaults() (Config, error) { return c.withDefaults() }

// withDefaults fills zero fields and checks the rest.
func (c Config) withDefaults() (Config, error) {
	if c.Clock == "" {
		c.Clock = Lockstep
	}
	if c.Clock != Lockstep && c.Clock != Wallclock {
		return c, fmt.Errorf("hil: clock mode %q: want lockstep or wallclock", c.Clock)
	}
	if c.TickHz == 0 {
		c.TickHz = DefaultTickHz
	}
	if !(c.TickHz >= 1 && c.TickHz <= 100000) {
		return c, fmt.Errorf("hil: tick rate %g Hz: want 1 … 100000 Hz", c.TickHz)
	}
	if c.Watchdog == 0 {
		c.Watchdog = DefaultWatchdog
	}
	if c.HandshakeTimeout == 0 {
		c.HandshakeTimeout = DefaultHandshakeTimeout
	}
	if c.Resend == 0 {
		c.Resend = DefaultResend
	}
	if c.AlarmInterval == 0 {
		c.AlarmInterval = DefaultAlarmInterval
	}
	if c.RealtimePriority == 0 {
		c.RealtimePriority = DefaultRealtimePriority
	}
	if c.Duration <= 0 && c.MaxSteps <= 0 {
		return c, errors.New("hil: the run has no end: set a duration, a step count or both")
	}
	if math.IsNaN(c.Duration) || math.IsInf(c.Duration, 0) {
		return c, fmt.Errorf("hil: run duration %g s is not a finite number", c.Duration)
	}
	for i, f := range c.LinkFaults {
		switch f.Kind {
		case FaultLatency:
			if f.Fixed < 0 || f.Jitter < 0 {
				return c, fmt.Errorf("hil: latency fault %d: fixed and jitter must be ≥ 0", i)
			}
			if ticks := (f.Fixed + f.Jitter).Seconds() * c.TickHz; ticks >= latencyQueueCap-1 {
				return c, fmt.Errorf("hil: latency fault %d: %v + %v is %.0f ticks at %g Hz; the loop holds at most %d ticks of delayed commands",
					i, f.Fixed, f.Jitter, ticks, c.TickHz, latencyQueueCap-2)
			}
		case FaultDrop, FaultCorrupt:
			if !(f.Rate > 0 && f.Rate <= 1) {
				return c, fmt.Errorf("hil: %s fault %d: rate %g must be in (0, 1]", f.Kind, i, f.Rate)
			}
		default:
			return c, fmt.Errorf("hil: link fault %d has kind %q: want latency, drop or corrupt", i, f.Kind)
		}
	}
	switch c.EStop {
	case "":
		c.EStop = EStopZero
	case EStopZero:
	case EStopDamp:
		if !(c.EStopDamping > 0) {
			return c, fmt.Errorf("hil: e-stop policy damp needs a damping > 0 N·m·s/rad, got %g", c.EStopDamping)
		}
	default:
		return c, fmt.Errorf("hil: e-stop policy %q: want zero or damp", c.EStop)
	}
	if c.EStopCoast < 0 || math.IsNaN(c.EStopCoast) || c.EStopCoast > 60 {
		return c, fmt.Errorf("hil: e-stop coast %g s: want 0 … 60 s", c.EStopCoast)
	}
	for i, p := range c.Pushes {
		if p.Force != [2]float64{} && !(p.Duration > 0) {
			return c, fmt.Errorf("hil: push %d has a force but no duration", i)
		}
	}
	return c, nil
}

// severity of an alarm kind under this config.
func (c *Config) severity(kind string) Severity {
	if s, ok := c.Severity[kind]; ok {
		return s
	}
	if s, ok := DefaultSeverity[kind]; ok {
		return s
	}
	return SeverityWarn
}

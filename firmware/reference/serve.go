package reference

import (
	"context"
	"errors"
	"fmt"
	"math"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
)

// Mode names for Options.Mode.
const (
	ModeWalk    = "walk"    // run the control law
	ModePassive = "passive" // answer every state with zero torques
)

// Options configure Serve.
type Options struct {
	// Gains of the control law; the zero value means DefaultGains.
	Gains *Gains
	// Mode is ModeWalk (default) or ModePassive.
	Mode string
	// Actuators is the number of torques announced in the greeting;
	// default 2 (the torso walker).
	Actuators int
	// Name and Build go into the greeting; defaults "gaitrig-reference"
	// and "go".
	Name, Build string
	// IdleTimeout ends Serve with an error when no message arrives for this
	// long after the greeting; default 10 s. A rig that vanished must not
	// leave the firmware waiting forever.
	IdleTimeout time.Duration
	// Protocol is the protocol version the firmware speaks; 0 means
	// protocol.Version. 1 makes it a board of version 1, which greets with
	// version 1, takes the version-1 config (no watchdog) and ignores
	// frames of any other version but stop: that is how the rig's service
	// of older boards is tested.
	Protocol uint8
	// GreetAgain makes the firmware behave as a board does after a stop
	// (docs/protocol.md section 6 item 5): instead of returning, Serve
	// forgets the configuration, greets again every GreetEvery and serves
	// the next rig that configures it, on the same link. False (the
	// default) keeps the one-shot firmware that tests and the rig's
	// built-in links start afresh for every run: Serve returns after the
	// first session.
	GreetAgain bool
	// SessionEnded, when not nil, is called after every session with its
	// result (nil for a normal end, an error wrapping ErrRigStopped for
	// another stop from the rig, or why the firmware refused the rig's
	// configuration). With GreetAgain it is the only way to learn how each
	// session ended.
	SessionEnded func(err error)
	// Dropped, when not nil, is called for every answer (or repeated
	// greeting) the link would not take because the frames queued before
	// it had not left yet (an error wrapping bridges.ErrSendBusy: the rig
	// had not read them, typically because the host did not run it). Serve
	// drops such a message and goes on, as a board drops a frame its full
	// UART buffer cannot take; the rig's resend of the state asks again.
	// Serve calls it from its own goroutine.
	Dropped func(m *protocol.Message, err error)
}

// finite reports whether every value of the reading is a finite number.
func (r *Reading) finite() bool {
	ok := func(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }
	for i := 0; i < r.Joints-r.Knees && i < len(r.Angle); i++ {
		if !ok(r.Angle[i]) || !ok(r.Rate[i]) {
			return false
		}
	}
	for i := 0; i < r.Knees && i < len(r.KneeAngle); i++ {
		if !ok(r.KneeAngle[i]) || !ok(r.KneeRate[i]) {
			return false
		}
	}
	return ok(r.Pitch) && ok(r.PitchRate)
}

// GreetEvery is how often Serve repeats its greeting until the rig answers
// with its configuration.
const GreetEvery = 250 * time.Millisecond

// ErrRigStopped is wrapped by the error Serve returns when the rig ended
// the run with a reason other than a normal end.
var ErrRigStopped = errors.New("reference: the rig stopped the run")

// Firmware is the reference firmware's protocol logic without a link: it
// makes the greeting and turns each message from the rig into the answer a
// board would give. Serve drives it over any bridges.Conn; inproc.Direct
// drives it synchronously, with no goroutine between rig and firmware, for
// fast lockstep suites. A Firmware is used by one goroutine at a time.
type Firmware struct {
	o          Options
	g          Gains
	base       Gains // the gains before a config lowered the torque limit
	configured bool
	knees      int           // actuated knees among the configured joints (see kneeJoints)
	watchdog   time.Duration // from a config of version 2; 0 until then or in version 1
	greeting   protocol.Message
	out        protocol.Message
}

// New checks o, fills in its defaults and returns a firmware waiting for the
// rig's configuration.
func New(o Options) (*Firmware, error) {
	g := DefaultGains()
	if o.Gains != nil {
		g = *o.Gains
	}
	if o.Mode == "" {
		o.Mode = ModeWalk
	}
	if o.Mode != ModeWalk && o.Mode != ModePassive {
		return nil, fmt.Errorf("reference: mode %q: want walk or passive", o.Mode)
	}
	if o.Actuators == 0 {
		o.Actuators = 2
	}
	if o.Actuators < 1 || o.Actuators > MaxJoints {
		return nil, fmt.Errorf("reference: %d actuators: the reference law drives 1 (compass) or 2 (torso walker) hips and up to 2 knees", o.Actuators)
	}
	if o.Name == "" {
		o.Name = "gaitrig-reference"
	}
	if o.Build == "" {
		o.Build = "go"
	}
	if o.IdleTimeout == 0 {
		o.IdleTimeout = 10 * time.Second
	}
	if o.Protocol == 0 {
		o.Protocol = protocol.Version
	}
	if !protocol.KnownVersion(o.Protocol) {
		return nil, fmt.Errorf("reference: protocol version %d: this build speaks versions %d to %d", o.Protocol, protocol.MinVersion, protocol.Version)
	}
	f := &Firmware{o: o, g: g, base: g}
	f.greeting.Version = o.Protocol
	f.greeting.Type = protocol.TypeGreeting
	f.greeting.Greeting = protocol.Greeting{Version: o.Protocol, Actuators: uint8(o.Actuators), Name: o.Name, Build: o.Build}
	f.out.Version = o.Protocol
	f.out.Type = protocol.TypeCommand
	return f, nil
}

// Greeting returns the greeting the firmware sends until it is configured.
func (f *Firmware) Greeting() *protocol.Message { return &f.greeting }

// Configured reports whether the rig's configuration has arrived.
func (f *Firmware) Configured() bool { return f.configured }

// Protocol is the protocol version the firmware speaks.
func (f *Firmware) Protocol() uint8 { return f.o.Protocol }

// Watchdog is the watchdog the rig's configuration announced (protocol
// version 2): how long the rig waits for a command before it e-stops. It is
// 0 before the configuration and for a firmware of version 1, whose config
// has no such field.
func (f *Firmware) Watchdog() time.Duration { return f.watchdog }

// Handle takes one message from the rig and returns the firmware's answer
// (nil when there is none; the message is the Firmware's own and valid until
// the next call). end is true when the session is over; err is then nil
// after a normal end (StopEnd), wraps ErrRigStopped for any other stop, or
// says why the firmware refused the rig's configuration (the answer is then
// a Stop). After the end the Firmware is unconfigured again: its next
// message is the greeting, and a new config starts a new session. It
// allocates nothing for a state.
func (f *Firmware) Handle(in *protocol.Message) (answer *protocol.Message, end bool, err error) {
	o := &f.o
	if v := in.WireVersion(); v != o.Protocol && in.Type != protocol.TypeStop {
		// A frame of a version this firmware does not speak is one it could
		// not have decoded: drop it as a board drops a bad frame. A stop
		// is read whatever its version, since its layout never changes
		// (docs/protocol.md section 8).
		return nil, false, nil
	}
	switch in.Type {
	case protocol.TypeConfig:
		if int(in.Config.Joints) != o.Actuators {
			f.out.Type = protocol.TypeStop
			f.out.Stop = protocol.Stop{Reason: protocol.StopFirmware, Text: "joint count mismatch"}
			return &f.out, true, fmt.Errorf("reference: the rig configured %d joints, this firmware drives %d", in.Config.Joints, o.Actuators)
		}
		// A config starts a session afresh: a limit lowered by an earlier
		// rig must not stay with the next one.
		f.g = f.base
		f.configured = true
		f.knees = kneeJoints(in.Config.JointNames[:o.Actuators])
		f.watchdog = time.Duration(in.Config.WatchdogUS) * time.Microsecond
		// The firmware keeps the rig's limits to itself: its own
		// TorqueLimit clips first, and the rig clips again. A limit of 0
		// is a joint the rig does not limit; it must not hide the limits
		// of the others.
		lim := math.Inf(1)
		for i := 0; i < o.Actuators; i++ {
			if l := float64(in.Config.TorqueLimit[i]); l > 0 {
				lim = math.Min(lim, l)
			}
		}
		if lim < f.g.TorqueLimit {
			f.g.TorqueLimit = lim
		}
	case protocol.TypeState:
		if !f.configured {
			return nil, false, nil
		}
		r := Reading{Joints: o.Actuators, Knees: f.knees, Pitch: float64(in.State.IMUPitch), PitchRate: float64(in.State.IMURate), Contacts: in.State.Contacts}
		r.BeltPos, r.OnBelt = in.State.BeltPosition()
		var angle, rate [MaxJoints]float64
		for i := 0; i < o.Actuators; i++ {
			angle[i] = float64(in.State.Angle[i])
			rate[i] = float64(in.State.Rate[i])
		}
		r.setJoints(angle[:o.Actuators], rate[:o.Actuators])
		var tau [MaxJoints]float64
		status := protocol.StatusOK
		switch {
		case !r.finite():
			// A reading with NaN or Inf is a sensor fault: a board answers
			// with zero torque and says so rather than pass it on.
			status = protocol.StatusFault
		case o.Mode == ModeWalk:
			Law(&f.g, &r, tau[:o.Actuators])
		}
		f.out.Type = protocol.TypeCommand
		f.out.Seq = in.Seq
		f.out.Command = protocol.Command{Joints: uint8(o.Actuators), Status: status}
		for i := 0; i < o.Actuators; i++ {
			f.out.Command.Torque[i] = float32(tau[i])
		}
		return &f.out, false, nil
	case protocol.TypeStop:
		// The session is over: the firmware waits for a rig again, as it
		// did after power-up (docs/protocol.md section 6 item 5).
		f.configured, f.watchdog, f.g = false, 0, f.base
		if in.Stop.Reason == protocol.StopEnd {
			return nil, true, nil
		}
		return nil, true, fmt.Errorf("%w: reason %d (%s)", ErrRigStopped, in.Stop.Reason, in.Stop.Text)
	}
	return nil, false, nil
}

// Serve runs the firmware side of the protocol over conn, exactly as a
// board would: send the greeting (repeated every GreetEvery until the rig
// answers, since a rig that starts listening late misses the first), take
// the rig's configuration, then answer every State with the Command that
// echoes its sequence number, until the rig sends Stop. A state with a NaN
// or infinite reading is answered with zero torques and the StatusFault
// bit. The firmware's torque limit is lowered to the smallest limit in the
// rig's configuration when that is lower (0, a joint the rig does not
// limit, does not count). Serve does not close conn.
//
// Without Options.GreetAgain, Serve returns after one session: nil after a
// normal end (StopEnd), an error wrapping ErrRigStopped for any other stop
// reason (e-stop, watchdog, abort), the refusal when the configuration does
// not fit, and the link's error if it closes or stays silent for
// IdleTimeout. With GreetAgain it serves one session after another (see
// ServeContext).
func Serve(conn bridges.Conn, o Options) error {
	return ServeContext(context.Background(), conn, o)
}

// ServeContext is Serve that also ends when ctx ends, returning nil then:
// the caller asked it to. With Options.GreetAgain, a session's end (its
// result goes to Options.SessionEnded) is followed by the greeting again,
// every GreetEvery, until the next rig configures the firmware; ServeContext
// then returns only when ctx ends, the link fails (its error), or no rig
// speaks for IdleTimeout: nil when at least one session was served (the
// bench went quiet after its runs), an error when none was.
func ServeContext(ctx context.Context, conn bridges.Conn, o Options) error {
	f, err := New(o)
	if err != nil {
		return err
	}
	o = f.o
	if err := conn.Send(f.Greeting()); err != nil {
		return fmt.Errorf("reference: sending the greeting: %w", err)
	}
	var m protocol.Message
	var fe *bridges.FrameError
	lastHeard := time.Now()
	lastGreeting := lastHeard
	sessions := 0
	for {
		if ctx.Err() != nil {
			return nil
		}
		// Until the rig configures it, the firmware repeats its greeting
		// every GreetEvery, as a board that boots before the rig listens
		// must: over MQTT or a freshly opened port the first one may be
		// lost. A context that can end is looked at as often, since
		// nothing can interrupt a waiting Recv but the link.
		now := time.Now()
		deadline := lastHeard.Add(o.IdleTimeout)
		if !f.configured {
			deadline = earlier(deadline, lastGreeting.Add(GreetEvery))
		}
		if ctx.Done() != nil {
			deadline = earlier(deadline, now.Add(GreetEvery))
		}
		err := conn.Recv(deadline, &m)
		switch {
		case err == nil:
			lastHeard = time.Now()
		case errors.As(err, &fe):
			continue // a board drops a bad frame and waits for the next one
		case errors.Is(err, bridges.ErrTimeout):
			if time.Since(lastHeard) >= o.IdleTimeout {
				if sessions > 0 {
					return nil
				}
				return fmt.Errorf("reference: nothing from the rig for %v", o.IdleTimeout)
			}
			if !f.configured && time.Since(lastGreeting) >= GreetEvery {
				lastGreeting = time.Now()
				if err := conn.Send(f.Greeting()); err != nil && !transient(err) {
					return fmt.Errorf("reference: link: %w", err)
				} else if err != nil {
					o.dropped(f.Greeting(), err)
				}
			}
			continue
		case errors.Is(err, bridges.ErrDisconnected):
			continue // the link is getting its peer back; the idle timeout decides
		default:
			return fmt.Errorf("reference: link: %w", err)
		}
		answer, end, herr := f.Handle(&m)
		if answer != nil {
			if err := conn.Send(answer); err != nil && !transient(err) && !end {
				// Anything but a link that is down and reconnecting, or
				// one whose send queue is full, ends the session.
				return fmt.Errorf("reference: sending a command: %w", err)
			} else if err != nil {
				// The answer is lost: the rig's resend asks again, and
				// its watchdog judges a gap that lasts.
				o.dropped(answer, err)
			}
		}
		if !end {
			continue
		}
		sessions++
		if o.SessionEnded != nil {
			o.SessionEnded(herr)
		}
		if !o.GreetAgain {
			return herr
		}
		// The next greeting comes one period after the stop, not at once:
		// the rig that stopped may still be reading its last answers.
		lastGreeting = time.Now()
	}
}

// transient reports whether a Send error leaves the link usable: it is
// down and reconnecting (bridges.ErrDisconnected), or its send queue is
// full (bridges.ErrSendBusy). The message is lost either way; a board
// would lose it too, and the rig's resends and watchdog deal with the gap.
func transient(err error) bool {
	return errors.Is(err, bridges.ErrDisconnected) || errors.Is(err, bridges.ErrSendBusy)
}

// dropped reports a message the link would not take, if the caller asked.
func (o *Options) dropped(m *protocol.Message, err error) {
	if o.Dropped != nil && errors.Is(err, bridges.ErrSendBusy) {
		o.Dropped(m, err)
	}
}

// earlier returns the earlier of two times.
func earlier(a, b time.Time) time.Time {
	if b.Before(a) {
		return b
	}
	return a
}

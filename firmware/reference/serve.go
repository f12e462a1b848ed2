package reference

import (
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
}

// finite reports whether every value of the reading is a finite number.
func (r *Reading) finite() bool {
	ok := func(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }
	for i := 0; i < r.Joints && i < len(r.Angle); i++ {
		if !ok(r.Angle[i]) || !ok(r.Rate[i]) {
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

// Serve runs the firmware side of the protocol over conn, exactly as a
// board would: send the greeting (repeated every GreetEvery until the rig
// answers, since a rig that starts listening late misses the first), take
// the rig's configuration, then answer
// every State with the Command that echoes its sequence number, until the
// rig sends Stop. A state with a NaN or infinite reading is answered with
// zero torques and the StatusFault bit. The firmware's torque limit is
// lowered to the smallest limit in the rig's configuration when that is
// lower. It returns nil after a normal end (StopEnd), an error
// wrapping ErrRigStopped for any other stop reason (e-stop, watchdog,
// abort), and the link's error if it closes or stays silent for
// IdleTimeout. Serve does not close conn.
func Serve(conn bridges.Conn, o Options) error {
	g := DefaultGains()
	if o.Gains != nil {
		g = *o.Gains
	}
	if o.Mode == "" {
		o.Mode = ModeWalk
	}
	if o.Mode != ModeWalk && o.Mode != ModePassive {
		return fmt.Errorf("reference: mode %q: want walk or passive", o.Mode)
	}
	if o.Actuators == 0 {
		o.Actuators = 2
	}
	if o.Actuators < 1 || o.Actuators > 2 {
		return fmt.Errorf("reference: %d actuators: the reference law drives 1 (compass) or 2 (torso walker)", o.Actuators)
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
	var m protocol.Message
	m.Type = protocol.TypeGreeting
	m.Greeting = protocol.Greeting{Version: protocol.Version, Actuators: uint8(o.Actuators), Name: o.Name, Build: o.Build}
	if err := conn.Send(&m); err != nil {
		return fmt.Errorf("reference: sending the greeting: %w", err)
	}
	greeting := m
	var out protocol.Message
	out.Type = protocol.TypeCommand
	var fe *bridges.FrameError
	configured := false
	var tau [2]float64
	lastHeard := time.Now()
	for {
		// Until the rig configures it, the firmware repeats its greeting
		// every GreetEvery, as a board that boots before the rig listens
		// must: over MQTT or a freshly opened port the first one may be
		// lost.
		deadline := lastHeard.Add(o.IdleTimeout)
		if !configured {
			if next := time.Now().Add(GreetEvery); next.Before(deadline) {
				deadline = next
			}
		}
		err := conn.Recv(deadline, &m)
		switch {
		case err == nil:
			lastHeard = time.Now()
		case errors.As(err, &fe):
			continue // a board drops a bad frame and waits for the next one
		case errors.Is(err, bridges.ErrTimeout):
			if time.Since(lastHeard) >= o.IdleTimeout {
				return fmt.Errorf("reference: nothing from the rig for %v", o.IdleTimeout)
			}
			if !configured {
				if err := conn.Send(&greeting); err != nil && !errors.Is(err, bridges.ErrDisconnected) {
					return fmt.Errorf("reference: link: %w", err)
				}
			}
			continue
		case errors.Is(err, bridges.ErrDisconnected):
			continue // the link is getting its peer back; the idle timeout decides
		default:
			return fmt.Errorf("reference: link: %w", err)
		}
		switch m.Type {
		case protocol.TypeConfig:
			if int(m.Config.Joints) != o.Actuators {
				var stop protocol.Message
				stop.Type = protocol.TypeStop
				stop.Stop = protocol.Stop{Reason: protocol.StopFirmware, Text: "joint count mismatch"}
				conn.Send(&stop)
				return fmt.Errorf("reference: the rig configured %d joints, this firmware drives %d", m.Config.Joints, o.Actuators)
			}
			configured = true
			// The firmware keeps the rig's limits to itself: its own
			// TorqueLimit clips first, and the rig clips again.
			lim := math.Inf(1)
			for i := 0; i < o.Actuators; i++ {
				lim = math.Min(lim, float64(m.Config.TorqueLimit[i]))
			}
			if lim > 0 && lim < g.TorqueLimit {
				g.TorqueLimit = lim
			}
		case protocol.TypeState:
			if !configured {
				continue
			}
			r := Reading{Joints: o.Actuators, Pitch: float64(m.State.IMUPitch), PitchRate: float64(m.State.IMURate), Contacts: m.State.Contacts}
			for i := 0; i < o.Actuators; i++ {
				r.Angle[i] = float64(m.State.Angle[i])
				r.Rate[i] = float64(m.State.Rate[i])
			}
			tau = [2]float64{}
			status := protocol.StatusOK
			switch {
			case !r.finite():
				// A reading with NaN or Inf is a sensor fault: a board answers
				// with zero torque and says so rather than pass it on.
				status = protocol.StatusFault
			case o.Mode == ModeWalk:
				Law(&g, &r, tau[:o.Actuators])
			}
			out.Seq = m.Seq
			out.Command.Joints = uint8(o.Actuators)
			out.Command.Status = status
			for i := 0; i < o.Actuators; i++ {
				out.Command.Torque[i] = float32(tau[i])
			}
			if err := conn.Send(&out); err != nil && !errors.Is(err, bridges.ErrDisconnected) {
				// A link that is down and reconnecting loses this command;
				// the rig's watchdog judges the gap. Anything else ends the
				// session.
				return fmt.Errorf("reference: sending a command: %w", err)
			}
		case protocol.TypeStop:
			if m.Stop.Reason == protocol.StopEnd {
				return nil
			}
			return fmt.Errorf("%w: reason %d (%s)", ErrRigStopped, m.Stop.Reason, m.Stop.Text)
		}
	}
}

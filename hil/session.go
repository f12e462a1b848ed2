package hil

// This file owns the protocol session with the firmware: the link (seen
// through the fault decorator), sequence numbers, the message buffers, the
// greeting and configuration, and what the firmware's command stream says
// (torques, status bits, stops).

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"sync/atomic"
	"time"
	"unicode/utf8"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/record"
)

// session is the conversation with the firmware.
type session struct {
	link     *faultLink          // the firmware link with the injected faults
	seq      uint32              // sequence number of the latest state
	out      protocol.Message    // the state sent this tick
	msg      protocol.Message    // the message received last
	fe       *bridges.FrameError // target of errors.As, kept here so it is not allocated per Recv
	greeting protocol.Greeting
	config   protocol.Message // the configuration sent, kept to send again

	// version is the protocol version the greeting agreed (0 before it):
	// every frame the rig sends carries it, and the gate refuses frames
	// of any other version as bad frames.
	version uint8
	gate    versionGate

	// Edges of the command stream, so a condition that persists raises
	// one alarm per episode.
	lastFW uint16 // last firmware status, for firmware_fault and firmware_safe_mode on the rising edge
	satNow bool   // the last command saturated

	// fwDone is set when the firmware ended the run with stop reason end.
	fwDone bool
}

// handshakePoll is how often the wait for the greeting looks at the
// notices (refusals of the embedded broker), so a refusal lands in the
// record while the rig still waits, not only when it gives up.
const handshakePoll = 100 * time.Millisecond

// handshake waits for the greeting, checks it and sends the configuration.
func (r *runner) handshake() error {
	ss := &r.sess
	deadline := time.Now().Add(r.cfg.HandshakeTimeout)
	for {
		wait := time.Now().Add(handshakePoll)
		if deadline.Before(wait) {
			wait = deadline
		}
		err := ss.link.Recv(wait, &ss.msg)
		switch classify(err, &ss.fe) {
		case linkTimeout:
			r.drainNotices()
			if time.Now().Before(deadline) {
				continue
			}
			return r.noGreeting()
		case linkDisconnected:
			r.disconnected(err)
			continue
		case linkClosed:
			r.linkLost("the link closed before the firmware greeted")
			return errors.New("hil: the link closed before the firmware greeted")
		case linkFrame:
			// A greeting of another protocol version does not decode on a
			// byte link; the link says so in the frame error. It is a
			// version mismatch to refuse with stop(bad_version), not noise
			// to wait through.
			var pe *protocol.Error
			if errors.As(ss.fe, &pe) && pe.Kind == protocol.KindVersion && pe.Type == protocol.TypeGreeting {
				who := "the firmware"
				if pe.Detail == "the greeting" {
					// The payload's version contradicts the frame's.
					who = fmt.Sprintf("the greeting in a frame of version %d", pe.Want)
				}
				r.versionMismatch(who, int(pe.Got))
				return nil
			}
			r.badFrame(ss.fe.Reason)
			continue
		case linkOther:
			return fmt.Errorf("hil: waiting for the greeting: %w", err)
		}
		if ss.msg.Type == protocol.TypeGreeting {
			break
		}
		// Anything else before the greeting (a stray command from a previous
		// run, a heartbeat) is not an error: the firmware may still be
		// finishing its last session.
	}
	g := ss.msg.Greeting
	// The frame's version is the version the firmware speaks. Over a byte
	// link Decode has already refused a greeting whose own version field
	// says otherwise; a link that carries messages unencoded (inproc) is
	// held to the same rule here, a zero field meaning the frame's version
	// as Encode would send it.
	v := ss.msg.WireVersion()
	if g.Version == 0 {
		g.Version = v
	}
	ss.greeting = g
	if r.rec != nil {
		if err := r.rec.SetGreeting(record.Greeting{Name: g.Name, Build: g.Build, Protocol: int(g.Version), Actuators: int(g.Actuators)}); err != nil {
			return err
		}
	}
	if g.Version != v || !protocol.KnownVersion(v) {
		r.versionMismatch(fmt.Sprintf("firmware %q", g.Name), int(g.Version))
		return nil
	}
	// From here on the session speaks the firmware's version: the
	// refusal of a wrong actuator count as much as the config and states.
	ss.version = v
	ss.gate.version.Store(uint32(v))
	ss.out.Version = v
	if int(g.Actuators) != r.n {
		return r.actuatorMismatch(g)
	}
	r.logf("firmware %q build %q greeted with protocol v%d; actuators: %d", g.Name, g.Build, g.Version, g.Actuators)
	c := &ss.config
	c.Version = v
	c.Type = protocol.TypeConfig
	c.Config.TickHz = uint16(math.Min(math.Round(r.cfg.TickHz), math.MaxUint16))
	c.Config.Lockstep = r.cfg.Clock == Lockstep
	c.Config.Joints = uint8(r.n)
	for i, name := range r.names {
		c.Config.JointNames[i] = name
		c.Config.TorqueLimit[i] = float32(r.act.limit[i])
	}
	// Version 1 has no field for it; Encode leaves it out of such a config.
	c.Config.WatchdogUS = WatchdogMicros(r.cfg.Watchdog)
	if err := ss.link.Send(c); err != nil {
		return fmt.Errorf("hil: sending the configuration: %w", err)
	}
	return nil
}

// WatchdogMicros is the watchdog as the config of protocol version 2
// carries it (docs/protocol.md section 3.2): whole microseconds rounded
// down, so a firmware that keeps within it is within the rig's watchdog;
// at least 1 µs, because 0 is refused on the wire; and at most the largest
// u32 (about 71.6 minutes), which a firmware reads as "at least that long".
func WatchdogMicros(d time.Duration) uint32 {
	us := d / time.Microsecond
	switch {
	case us < 1:
		return 1
	case us > math.MaxUint32:
		return math.MaxUint32
	}
	return uint32(us)
}

// versionGate is the part of the firmware link that holds every frame
// after the greeting to the version the greeting agreed (docs/protocol.md
// section 8): the decoder accepts every version this build speaks, so a
// frame of another of them mid-run decodes, and the gate turns it into the
// broken frame the document says it is (alarm bad_frame, a warning), the
// same for both clocks and every link. Before the greeting (version 0) it
// lets everything through. Frames of the agreed version pass without an
// allocation.
type versionGate struct {
	bridges.Conn
	version atomic.Uint32 // the agreed version; written by the handshake, read by the receiving goroutine
}

// Recv passes on the next message of the link, or a *bridges.FrameError
// wrapping a *protocol.Error of KindVersion for one of another version.
func (g *versionGate) Recv(deadline time.Time, m *protocol.Message) error {
	err := g.Conn.Recv(deadline, m)
	if err != nil {
		return err
	}
	want := uint8(g.version.Load())
	if got := m.WireVersion(); want != 0 && got != want {
		pe := &protocol.Error{Kind: protocol.KindVersion, Type: m.Type, Got: int64(got), Want: int64(want)}
		return &bridges.FrameError{Err: pe,
			Reason: fmt.Sprintf("wrong protocol version: the %s frame speaks version %d, this session speaks version %d (agreed by the greeting)", m.Type, got, want)}
	}
	return nil
}

// gated returns the link the session reads through: conn behind the
// session's version gate.
func (ss *session) gated(conn bridges.Conn) bridges.Conn {
	ss.gate.Conn = conn
	return &ss.gate
}

// ErrActuatorMismatch is wrapped by the error of a run refused because the
// firmware drives another number of actuators than the walker has joints:
// the bench is set up wrong (firmware and scenario do not belong together),
// which the command line reports as a configuration problem (exit 2).
var ErrActuatorMismatch = errors.New("the firmware does not fit this walker")

// noGreeting is the error of a handshake that timed out. When the embedded
// broker refused connections or publishes meanwhile, it says so: a board
// with the wrong client id is then told what went wrong, instead of being
// asked whether it is powered.
func (r *runner) noGreeting() error {
	msg := fmt.Sprintf("hil: no greeting from the firmware within %v; is it connected, powered and speaking protocol v%d or v%d?", r.cfg.HandshakeTimeout, protocol.MinVersion, protocol.Version)
	if q := r.cfg.Notices; q != nil {
		if d := q.describe(); d != "" {
			msg += " The broker refused connections or messages meanwhile: " + d
		}
	}
	return errors.New(msg)
}

// actuatorMismatch refuses a firmware that drives another number of
// actuators than the walker has joints: alarm actuator_mismatch, stop reason
// mismatch, outcome aborted (the run never started), and an error wrapping
// ErrActuatorMismatch.
func (r *runner) actuatorMismatch(g protocol.Greeting) error {
	msg := fmt.Sprintf("firmware %q announces actuators: %d; this walker has %d joints (%s)", g.Name, g.Actuators, r.n, strings.Join(r.names, ", "))
	// The run ends here whatever the severity, so the alarm is always logged.
	r.al.counts[AlarmActuatorMismatch]++
	r.al.emit(alarm{kind: AlarmActuatorMismatch, tick: 0, t: 0, foot: -1, segment: -1, message: msg,
		values: map[string]float64{"actuators": float64(g.Actuators), "joints": float64(r.n)}})
	r.end.end(record.Aborted, msg, protocol.StopMismatch)
	return fmt.Errorf("hil: %w: %s", ErrActuatorMismatch, msg)
}

// versionMismatch refuses a firmware that speaks a protocol version this
// rig does not (or a greeting that contradicts itself): alarm, outcome
// tripped, and a stop with reason bad_version in the rig's newest version
// (the stop layout is the same in every version, so any firmware reads it).
func (r *runner) versionMismatch(who string, version int) {
	r.sess.greeting.Version = uint8(version) // for the stop text, also when the greeting did not decode
	msg := fmt.Sprintf("%s speaks protocol version %d, this rig speaks versions %d to %d", who, version, protocol.MinVersion, protocol.Version)
	r.al.raise(AlarmVersionMismatch, 0, 0, -1, -1, func() (string, map[string]float64) {
		return msg, map[string]float64{"firmware_version": float64(version), "rig_version": float64(protocol.Version), "rig_min_version": float64(protocol.MinVersion)}
	})
	r.end.end(record.Tripped, msg, protocol.StopBadVersion)
}

// greetedAgain handles a greeting after the handshake. Before the first
// command it means the configuration was lost on the way (or several
// greetings were buffered before the rig opened the port): send it again,
// and the firmware tolerates the duplicate. After commands have come it
// means the firmware restarted mid-run: alarm firmware_reset (trip by
// default); when a scenario makes it a warning, the configuration goes out
// again so the firmware can go on, and the watchdog judges the gap.
func (r *runner) greetedAgain() {
	if n := r.health.counts.Commands; n > 0 {
		if r.al.raise(AlarmFirmwareReset, r.pt.tick, r.pt.s.T, -1, -1, func() (string, map[string]float64) {
			return "the firmware greeted again in the middle of the run: it restarted", map[string]float64{"commands_before": float64(n)}
		}) {
			r.trip(protocol.StopEStop)
			return
		}
	}
	r.sess.link.Send(&r.sess.config)
}

// takeCommand applies one valid command from the firmware: torque checks,
// saturation, status alarms and the knee unlock bits (knees.go).
func (r *runner) takeCommand(c *protocol.Command) {
	ss := &r.sess
	r.health.counts.Commands++
	r.fresh = true
	for i := 0; i < protocol.MaxJoints; i++ {
		r.pt.commanded[i] = float64(c.Torque[i])
	}
	chk := r.act.command(c)
	switch {
	case chk.wrongJoints:
		r.health.counts.BadTorques++
		n := c.Joints
		if r.al.raise(AlarmBadTorque, r.pt.tick, r.pt.s.T, -1, -1, func() (string, map[string]float64) {
			return fmt.Sprintf("command carries %d torques, this walker has %d joints: rejected, zero torque applied", n, r.n),
				map[string]float64{"torques": float64(n), "joints": float64(r.n)}
		}) {
			r.trip(protocol.StopEStop)
		}
		return
	case chk.bad:
		r.health.counts.BadTorques++
		j, v := chk.badJoint, chk.badValue
		if r.al.raise(AlarmBadTorque, r.pt.tick, r.pt.s.T, -1, -1, func() (string, map[string]float64) {
			return fmt.Sprintf("commanded torque %s = %g N·m is not a usable torque (NaN, infinite or beyond %g N·m): command rejected, zero torque applied", r.names[j], v, r.act.model.Sanity),
				map[string]float64{"joint": float64(j), "torque_nm": v, "sanity_nm": r.act.model.Sanity}
		}) {
			r.trip(protocol.StopEStop)
		}
		return
	}
	if chk.saturated && !ss.satNow {
		j, v := chk.satJoint, chk.satValue
		if r.al.raise(AlarmTorqueSaturation, r.pt.tick, r.pt.s.T, -1, -1, func() (string, map[string]float64) {
			return fmt.Sprintf("commanded torque %s = %.4g N·m beyond the limit %.4g N·m: clipped", r.names[j], v, r.act.limit[j]),
				map[string]float64{"joint": float64(j), "torque_nm": v, "limit_nm": r.act.limit[j]}
		}) {
			r.trip(protocol.StopEStop)
		}
	}
	ss.satNow = chk.saturated
	if c.Status&protocol.StatusFault != 0 && ss.lastFW&protocol.StatusFault == 0 {
		st := c.Status
		if r.al.raise(AlarmFirmwareFault, r.pt.tick, r.pt.s.T, -1, -1, func() (string, map[string]float64) {
			return "the firmware reports an internal fault (status bit 0 set)", map[string]float64{"status": float64(st)}
		}) {
			r.trip(protocol.StopEStop)
		}
	}
	if c.Status&protocol.StatusSafeMode != 0 && ss.lastFW&protocol.StatusSafeMode == 0 {
		st := c.Status
		if r.al.raise(AlarmFirmwareSafeMode, r.pt.tick, r.pt.s.T, -1, -1, func() (string, map[string]float64) {
			return "the firmware reports it is in its own safe mode (status bit 1 set); the rig applies its torques as sent", map[string]float64{"status": float64(st)}
		}) {
			r.trip(protocol.StopEStop)
		}
	}
	ss.lastFW = c.Status
	if !r.end.set() {
		r.takeKneeUnlock(c.KneeUnlock)
	}
}

// firmwareStop handles a Stop from the firmware. Reason end (0) is the
// firmware ending the run normally (its test programme is done): the run
// ends here and is judged by its criteria like a run that reached its
// duration. Any other reason means the firmware cannot go on: alarm
// firmware_fault, which trips by default.
func (r *runner) firmwareStop(st protocol.Stop) {
	if st.Reason == protocol.StopEnd {
		r.sess.fwDone = true
		r.al.info("firmware_done", r.pt.tick, r.pt.s.T, fmt.Sprintf("the firmware ended the run (stop reason 0 end: %q)", st.Text), nil)
		return
	}
	msg := fmt.Sprintf("the firmware stopped the run (reason %d: %q)", st.Reason, st.Text)
	// The run ends here, so this alarm is logged even inside the rate limit.
	r.al.counts[AlarmFirmwareFault]++
	if r.al.emit(alarm{kind: AlarmFirmwareFault, tick: r.pt.tick, t: r.pt.s.T, foot: -1, segment: -1,
		message: msg, values: map[string]float64{"reason": float64(st.Reason)}}) {
		r.trip(protocol.StopFirmware)
		return
	}
	r.end.end(record.Fail, msg, protocol.StopFirmware)
}

// sendState sends the tick's state; the fault link may lose it. A Send
// that fails because the link is down or closed loses this state too;
// Recv reports the link's condition and the watchdog decides.
func (r *runner) sendState() {
	r.sess.link.Send(&r.sess.out)
}

// sendStop tells the firmware the run is over and why. Its seq is the seq
// of the latest state sent (0 before the first), as a heartbeat's would be.
func (r *runner) sendStop() {
	var m protocol.Message
	m.Version = r.sess.version // 0 (Version) when no version was agreed
	m.Type = protocol.TypeStop
	m.Seq = r.sess.seq
	m.Stop.Reason = r.end.stopCode
	m.Stop.Text = r.stopText()
	r.sess.link.Send(&m)
}

// stopText is the 32-byte text of the rig's stop: a short phrase per stop
// code, naming the alarm that tripped, so it never has to be cut. The
// whole reason is in the run record; the firmware gets what fits a board's
// display or log line.
func (r *runner) stopText() string {
	tripKind := ""
	if r.al.trip != nil {
		tripKind = r.al.trip.kind
	}
	g := r.sess.greeting
	operator := strings.HasPrefix(r.end.reason, operatorReason)
	return stopText(r.end.stopCode, r.end.outcome, tripKind, operator, r.cfg.Watchdog, int(g.Version), int(g.Actuators), r.n)
}

// operatorReason begins the reason of a run the operator interrupted
// (ending.go's aborted).
const operatorReason = "interrupted by the operator"

// stopText composes the stop text from what ended the run; it is a pure
// function so a test can try every combination the rig can send.
func stopText(code uint8, outcome record.Outcome, tripKind string, operator bool, watchdog time.Duration, fwVersion, actuators, joints int) string {
	var t string
	switch code {
	case protocol.StopEnd:
		t = "run finished"
		if outcome == record.Fail {
			t = "plant stopped at an event"
		}
	case protocol.StopEStop:
		t = "e-stop"
		if tripKind != "" {
			t = "e-stop: " + tripKind
		}
	case protocol.StopWatchdog:
		t = fmt.Sprintf("no command for %d ms", watchdog.Milliseconds())
	case protocol.StopAborted:
		t = "run aborted by a rig error"
		if operator {
			t = "interrupted by the operator"
		}
	case protocol.StopFirmware:
		t = "firmware stopped the run"
	case protocol.StopBadVersion:
		t = fmt.Sprintf("rig speaks v%d-v%d, firmware v%d", protocol.MinVersion, protocol.Version, fwVersion)
	case protocol.StopMismatch:
		t = fmt.Sprintf("rig needs %d actuators, not %d", joints, actuators)
	default:
		t = fmt.Sprintf("stop reason %d", code)
	}
	if len(t) > protocol.MaxNameLen {
		// Unreachable for the texts above (a test tries them all); kept so
		// a future text can never make an unencodable frame.
		t = t[:protocol.MaxNameLen]
		for len(t) > 0 && !utf8.ValidString(t) {
			t = t[:len(t)-1]
		}
	}
	return t
}

// closeSession is the end of the conversation: refusals still queued
// become alarms, and the counts of every kind of rejected frame and broker
// refusal go to the record in one line each, so the rate limit of the
// alarms never hides how many there were.
func (r *runner) closeSession() {
	r.drainNotices()
	if k := r.health.frameKinds; len(k) > 0 {
		v := make(map[string]float64, len(k))
		for kind, n := range k {
			v[kind] = float64(n)
		}
		r.al.info("bad_frame_summary", r.pt.tick, r.pt.s.T, fmt.Sprintf("%d frames from the firmware were rejected; the values count each kind", r.health.counts.BadFrames), v)
	}
	if q := r.cfg.Notices; q != nil {
		if c := q.Counts(); len(c) > 0 {
			v := make(map[string]float64, len(c))
			var total uint64
			for kind, n := range c {
				v[kind] = float64(n)
				total += n
			}
			r.al.info("broker_refusal_summary", r.pt.tick, r.pt.s.T, fmt.Sprintf("the broker refused %d connections, publishes or subscriptions during the run; the values count each kind", total), v)
		}
	}
}

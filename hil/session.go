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

	// Edges of the command stream, so a condition that persists raises
	// one alarm per episode.
	lastFW uint16 // last firmware status, for firmware_fault on the rising edge
	satNow bool   // the last command saturated
}

// handshake waits for the greeting, checks it and sends the configuration.
func (r *runner) handshake() error {
	ss := &r.sess
	deadline := time.Now().Add(r.cfg.HandshakeTimeout)
	for {
		err := ss.link.Recv(deadline, &ss.msg)
		switch classify(err, &ss.fe) {
		case linkTimeout:
			return fmt.Errorf("hil: no greeting from the firmware within %v; is it connected, powered and speaking protocol v%d?", r.cfg.HandshakeTimeout, protocol.Version)
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
				r.versionMismatch("the firmware", int(pe.Got))
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
	ss.greeting = g
	if r.rec != nil {
		if err := r.rec.SetGreeting(record.Greeting{Name: g.Name, Build: g.Build, Protocol: int(g.Version), Actuators: int(g.Actuators)}); err != nil {
			return err
		}
	}
	if g.Version != protocol.Version {
		r.versionMismatch(fmt.Sprintf("firmware %q", g.Name), int(g.Version))
		return nil
	}
	if int(g.Actuators) != r.n {
		err := fmt.Errorf("hil: firmware %q announces actuators: %d, this walker has %d (%s)", g.Name, g.Actuators, r.n, strings.Join(r.names, ", "))
		r.end.end(record.Aborted, err.Error(), protocol.StopEStop)
		return err
	}
	r.logf("firmware %q build %q greeted with protocol v%d; actuators: %d", g.Name, g.Build, g.Version, g.Actuators)
	c := &ss.config
	c.Type = protocol.TypeConfig
	c.Config.TickHz = uint16(math.Min(math.Round(r.cfg.TickHz), math.MaxUint16))
	c.Config.Lockstep = r.cfg.Clock == Lockstep
	c.Config.Joints = uint8(r.n)
	for i, name := range r.names {
		c.Config.JointNames[i] = name
		c.Config.TorqueLimit[i] = float32(r.act.limit[i])
	}
	if err := ss.link.Send(c); err != nil {
		return fmt.Errorf("hil: sending the configuration: %w", err)
	}
	return nil
}

// versionMismatch refuses a firmware that speaks another protocol version:
// alarm, outcome tripped, and a stop with reason bad_version (which every
// version can read).
func (r *runner) versionMismatch(who string, version int) {
	msg := fmt.Sprintf("%s speaks protocol version %d, this rig speaks version %d", who, version, protocol.Version)
	r.al.raise(AlarmVersionMismatch, 0, 0, -1, -1, func() (string, map[string]float64) {
		return msg, map[string]float64{"firmware_version": float64(version), "rig_version": float64(protocol.Version)}
	})
	r.end.end(record.Tripped, msg, protocol.StopBadVersion)
}

// greetedAgain handles a greeting after the handshake. Before the first
// command it means the configuration was lost on the way: send it again.
// After commands have come it means the firmware restarted mid-run: an
// alarm, and the configuration again so it can go on.
func (r *runner) greetedAgain() {
	if n := r.health.counts.Commands; n > 0 {
		if r.al.raise(AlarmFirmwareFault, r.pt.tick, r.pt.s.T, -1, -1, func() (string, map[string]float64) {
			return "the firmware greeted again in the middle of the run: it restarted", map[string]float64{"commands_before": float64(n)}
		}) {
			r.trip(protocol.StopEStop)
			return
		}
	}
	r.sess.link.Send(&r.sess.config)
}

// takeCommand applies one valid command from the firmware: torque checks,
// saturation and status alarms.
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
	ss.lastFW = c.Status
}

// firmwareStop handles a Stop from the firmware: the run cannot go on.
func (r *runner) firmwareStop(st protocol.Stop) {
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

// sendStop tells the firmware the run is over and why.
func (r *runner) sendStop() {
	var m protocol.Message
	m.Type = protocol.TypeStop
	m.Seq = r.sess.seq + 1
	m.Stop.Reason = r.end.stopCode
	text := r.end.reason
	if text == "" {
		text = "run finished"
	}
	if len(text) > protocol.MaxNameLen {
		// Cut at a rune boundary so the firmware never gets half a "μ".
		cut := protocol.MaxNameLen
		for cut > 0 && !utf8.RuneStart(text[cut]) {
			cut--
		}
		text = text[:cut]
	}
	m.Stop.Text = text
	r.sess.link.Send(&m)
}

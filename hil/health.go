package hil

// This file owns link health: the one classification of link errors both
// clocks use, the loop's counts of the link, outages and link events, bad
// frames, the watchdog and the e-stop.

import (
	"errors"
	"fmt"
	"strings"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/record"
)

// linkHealth is what the loop knows about the link's condition.
type linkHealth struct {
	counts   LinkCounts       // the loop's own counts (the fault link keeps those of injected faults)
	notifier bridges.Notifier // the real link's health reports; nil if it has none
	linkDown bool             // an outage was raised and no valid command has come since

	// frameKinds counts rejected frames per kind of rejection (frameKind),
	// at most maxFrameKinds keys; nil until the first bad frame.
	frameKinds    map[string]uint64
	lastFrameKind string // the key the latest rejection was counted under
}

// linkErr is what an error from Recv means to the loop.
type linkErr int

const (
	linkOK           linkErr = iota // a message arrived
	linkTimeout                     // the deadline passed (also while a reconnecting link is still down)
	linkDisconnected                // the link lost its peer and is trying to get it back
	linkClosed                      // the link is closed for good
	linkFrame                       // a frame was rejected; the link stays usable (the *bridges.FrameError is in fe)
	linkOther                       // an error the link does not classify: an outage until the watchdog says otherwise
)

// classify sorts an error from Conn.Recv. The order matters: a reconnecting
// link wraps ErrDisconnected together with ErrTimeout for deadlines that
// pass while it is down, and that is a timeout. fe receives the frame
// error; it lives in the caller's state so errors.As does not allocate.
func classify(err error, fe **bridges.FrameError) linkErr {
	switch {
	case err == nil:
		return linkOK
	case errors.Is(err, bridges.ErrTimeout):
		return linkTimeout
	case errors.Is(err, bridges.ErrDisconnected):
		return linkDisconnected
	case errors.Is(err, bridges.ErrClosed):
		return linkClosed
	case errors.As(err, fe):
		return linkFrame
	}
	return linkOther
}

// linkCounts joins the loop's counts with those of the injected faults.
func (r *runner) linkCounts() LinkCounts {
	c := r.health.counts
	f := r.sess.link
	c.StatesSent = f.statesSent.Load()
	c.DroppedStates = f.droppedStates.Load()
	c.DroppedCommand = f.droppedCommands.Load()
	c.Corrupted = f.corrupted.Load()
	return c
}

// drainLinkEvents turns the link's health reports, and the notices from
// outside the link, into alarms.
func (r *runner) drainLinkEvents() {
	r.drainNotices()
	n := r.health.notifier
	if n == nil {
		return
	}
	for {
		select {
		case ev := <-n.Events():
			switch ev.Kind {
			case bridges.LinkDisconnected:
				cause := "unknown cause"
				if ev.Err != nil {
					cause = ev.Err.Error()
				}
				r.linkLost("link to the firmware lost: " + cause)
			case bridges.LinkReconnected:
				gap := ev.Gap
				if r.al.raise(AlarmLinkRestored, r.pt.tick, r.pt.s.T, -1, -1, func() (string, map[string]float64) {
					return fmt.Sprintf("link to the firmware restored after %v", gap), map[string]float64{"gap_ms": float64(gap) / 1e6}
				}) {
					r.trip(protocol.StopEStop)
				}
				if gap > r.cfg.Watchdog {
					r.watchdog(gap)
				}
			}
		default:
			return
		}
	}
}

// disconnected handles a Recv that reports the peer gone on a link that
// reconnects by itself. A link that reports link events raises its own
// link_lost through them; for one that does not, the loop raises it here.
func (r *runner) disconnected(err error) {
	if r.health.notifier != nil {
		r.drainLinkEvents()
		return
	}
	if r.health.linkDown {
		return // raised once per outage; a valid command ends it
	}
	r.health.linkDown = true
	r.linkLost("link to the firmware lost: " + err.Error())
}

// validCommand notes that a valid command came: an outage is over.
func (r *runner) validCommand() { r.health.linkDown = false }

// linkLost raises link_lost with msg, and trips if the scenario makes it a
// trip.
func (r *runner) linkLost(msg string) {
	if r.al.raise(AlarmLinkLost, r.pt.tick, r.pt.s.T, -1, -1, func() (string, map[string]float64) {
		return msg, nil
	}) {
		r.trip(protocol.StopEStop)
	}
}

// linkClosed ends the run on a link that closed for good.
func (r *runner) linkClosed() {
	r.linkLost("link to the firmware closed")
	r.end.end(record.Aborted, "the link to the firmware closed", protocol.StopEStop)
}

// badFrame counts a rejected frame under its kind and raises bad_frame.
// The alarm is rate-limited per alarm kind, but the first frame of each
// kind of rejection is always logged: a burst of over-long frames must not
// hide the unknown message type that follows it. The end of the run logs
// the count of every kind (closeSession).
func (r *runner) badFrame(reason string) {
	r.health.counts.BadFrames++
	n := r.health.counts.BadFrames
	kind := frameKind(reason)
	msg := func() (string, map[string]float64) {
		return "rejected a frame from the firmware: " + reason, map[string]float64{"bad_frames_so_far": float64(n)}
	}
	if r.health.noteFrameKind(kind) {
		r.al.counts[AlarmBadFrame]++
		m, v := msg()
		if r.al.emit(alarm{kind: AlarmBadFrame, tick: r.pt.tick, t: r.pt.s.T, foot: -1, segment: -1, message: m, values: v}) {
			r.trip(protocol.StopEStop)
		}
		return
	}
	if r.al.raise(AlarmBadFrame, r.pt.tick, r.pt.s.T, -1, -1, msg) {
		r.trip(protocol.StopEStop)
	}
}

// badFrames is badFrame for n frames rejected for the same reason, with
// one alarm line at most: a flood of garbage costs the loop O(1).
func (r *runner) badFrames(reason string, n uint64) {
	if n == 0 {
		return
	}
	r.badFrame(reason)
	if extra := n - 1; extra > 0 {
		r.health.counts.BadFrames += extra
		r.al.counts[AlarmBadFrame] += int(extra)
		r.health.frameKinds[r.health.lastFrameKind] += extra
	}
}

// maxFrameKinds bounds the kinds of rejection counted apart; a peer
// sending ever new garbage cannot grow the table, the rest count as
// "other".
const maxFrameKinds = 16

// noteFrameKind counts one rejection of kind and reports whether it is the
// first of its kind in this run.
func (h *linkHealth) noteFrameKind(kind string) bool {
	if h.frameKinds == nil {
		h.frameKinds = map[string]uint64{}
	}
	if _, ok := h.frameKinds[kind]; !ok && len(h.frameKinds) >= maxFrameKinds {
		kind = "other"
	}
	h.frameKinds[kind]++
	h.lastFrameKind = kind
	return h.frameKinds[kind] == 1
}

// frameKind names the kind of a frame rejection from its reason: the words
// before the first colon or number ("bad CRC", "frame too long", "unknown
// message type"). Reasons come from the decoder (protocol.Error) or the
// transport, both of which start with the kind in words.
func frameKind(reason string) string {
	end := len(reason)
	for i, c := range reason {
		if c == ':' || c == '(' || (c >= '0' && c <= '9') {
			end = i
			break
		}
	}
	k := strings.TrimSpace(reason[:end])
	if k == "" {
		return "other"
	}
	return k
}

func (r *runner) watchdog(silent time.Duration) {
	ms := float64(silent) / 1e6
	if r.al.raise(AlarmWatchdog, r.pt.tick, r.pt.s.T, -1, -1, func() (string, map[string]float64) {
		return fmt.Sprintf("no valid command from the firmware for %.1f ms (watchdog %v): e-stop", ms, r.cfg.Watchdog),
			map[string]float64{"silent_ms": ms, "watchdog_ms": float64(r.cfg.Watchdog) / 1e6}
	}) {
		r.trip(protocol.StopWatchdog)
	}
}

// deadlineMiss raises deadline_miss for a wall-clock tick whose work ended
// after the next tick was due.
func (r *runner) deadlineMiss() {
	r.times.misses++
	n := r.times.misses
	if r.al.raise(AlarmDeadlineMiss, r.pt.tick, r.pt.s.T, -1, -1, func() (string, map[string]float64) {
		return "a tick's work ended after the next tick was due", map[string]float64{"misses_so_far": float64(n)}
	}) {
		r.trip(protocol.StopEStop)
	}
}

// trip e-stops: torques to zero, outcome tripped. The Stop message goes out
// when the loop ends.
func (r *runner) trip(code uint8) {
	if r.end.set() {
		return
	}
	r.act.zero()
	reason := ""
	if r.al.trip != nil {
		reason = r.al.trip.kind + ": " + r.al.trip.message
	}
	r.end.end(record.Tripped, reason, code)
	r.al.info("e_stop", r.pt.tick, r.pt.s.T, "e-stop: torques set to zero, firmware told to stop ("+reason+")", nil)
}

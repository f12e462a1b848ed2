package hil

// This file holds link health: link events, bad frames, the watchdog and the
// e-stop.

import (
	"fmt"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/record"
)

// drainLinkEvents turns the link's health reports into alarms.
func (r *runner) drainLinkEvents() {
	n, ok := r.conn.(bridges.Notifier)
	if !ok {
		return
	}
	for {
		select {
		case ev := <-n.Events():
			switch ev.Kind {
			case "disconnected":
				cause := "unknown cause"
				if ev.Err != nil {
					cause = ev.Err.Error()
				}
				r.linkLost("link to the firmware lost: " + cause)
			case "reconnected":
				gap := ev.Gap
				if r.al.raise(AlarmLinkRestored, r.tick, r.s.T, -1, -1, func() (string, map[string]float64) {
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
	if _, ok := r.conn.(bridges.Notifier); ok {
		r.drainLinkEvents()
		return
	}
	if r.linkDown {
		return // raised once per outage; a valid command ends it
	}
	r.linkDown = true
	r.linkLost("link to the firmware lost: " + err.Error())
}

// linkLost raises link_lost with msg, and trips if the scenario makes it a
// trip.
func (r *runner) linkLost(msg string) {
	if r.al.raise(AlarmLinkLost, r.tick, r.s.T, -1, -1, func() (string, map[string]float64) {
		return msg, nil
	}) {
		r.trip(protocol.StopEStop)
	}
}

func (r *runner) badFrame(reason string) {
	r.counts.BadFrames++
	if r.al.raise(AlarmBadFrame, r.tick, r.s.T, -1, -1, func() (string, map[string]float64) {
		return "rejected a frame from the firmware: " + reason, map[string]float64{"bad_frames_so_far": float64(r.counts.BadFrames)}
	}) {
		r.trip(protocol.StopEStop)
	}
}

func (r *runner) watchdog(silent time.Duration) {
	ms := float64(silent) / 1e6
	if r.al.raise(AlarmWatchdog, r.tick, r.s.T, -1, -1, func() (string, map[string]float64) {
		return fmt.Sprintf("no valid command from the firmware for %.1f ms (watchdog %v): e-stop", ms, r.cfg.Watchdog),
			map[string]float64{"silent_ms": ms, "watchdog_ms": float64(r.cfg.Watchdog) / 1e6}
	}) {
		r.trip(protocol.StopWatchdog)
	}
}

// trip e-stops: torques to zero, outcome tripped. The Stop message goes out
// when the loop ends.
func (r *runner) trip(code uint8) {
	if r.outcome != "" {
		return
	}
	r.act.zero()
	r.outcome, r.stopCode = record.Tripped, code
	if r.al.trip != nil {
		r.reason = r.al.trip.kind + ": " + r.al.trip.message
	}
	r.al.info("e_stop", r.tick, r.s.T, "e-stop: torques set to zero, firmware told to stop ("+r.reason+")", nil)
}

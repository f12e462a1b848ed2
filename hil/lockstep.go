package hil

// This file holds the lockstep clock: one exchange per tick, the latency
// queue and random link faults.

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/record"
)

// latencyQueueCap is how many delayed commands a lockstep latency fault can
// hold: at 1 kHz, about a second of delay.
const latencyQueueCap = 1024

// stallSlack is how late a lockstep wait may end before the loop treats the
// lateness as a stall of its own process rather than firmware silence; Go
// timer wake-ups are late by up to about a millisecond on a busy host
// (measured here), so 5 ms is well clear of normal lateness.
const stallSlack = 5 * time.Millisecond

// finalLooks is how many waiting messages the loop reads, past the
// watchdog, before it trips: after a stall of the rig a stale answer (to a
// resent state) may sit in the link's buffer ahead of the valid one. The
// bound keeps a firmware that floods the link from holding the loop there;
// 64 is the in-process link's whole buffer.
const finalLooks = 64

// latencyQueue holds commands delayed by a latency fault in lockstep, as
// (release tick, command) in arrival order. Fixed size: a delay longer than
// its capacity in ticks is refused at configuration time.
type latencyQueue struct {
	items [latencyQueueCap]struct {
		release int64
		cmd     protocol.Command
	}
	head, n int
}

func (q *latencyQueue) push(release int64, c *protocol.Command) bool {
	if q.n == latencyQueueCap {
		return false
	}
	it := &q.items[(q.head+q.n)%latencyQueueCap]
	it.release, it.cmd = release, *c
	q.n++
	return true
}

// popDue removes every command due by tick and returns the newest of them.
func (q *latencyQueue) popDue(tick int64, out *protocol.Command) bool {
	got := false
	for q.n > 0 {
		it := &q.items[q.head]
		if it.release > tick {
			break
		}
		*out = it.cmd
		got = true
		q.head = (q.head + 1) % latencyQueueCap
		q.n--
	}
	return got
}

// latencyDelay draws the latency the active latency faults add to one
// command; lockstep rounds it to whole ticks, wall-clock holds it exactly.
func (r *runner) latencyDelay(t float64, rng *rand.Rand) time.Duration {
	var d time.Duration
	for i := range r.cfg.LinkFaults {
		f := &r.cfg.LinkFaults[i]
		if f.Kind != FaultLatency || !f.active(t) {
			continue
		}
		d += f.Fixed
		if f.Jitter > 0 {
			d += time.Duration(rng.Float64() * float64(f.Jitter))
		}
	}
	return d
}

// chance reports whether an active fault of the kind fires for one frame.
func (r *runner) chance(kind LinkFaultKind, t float64, rng *rand.Rand) bool {
	for i := range r.cfg.LinkFaults {
		f := &r.cfg.LinkFaults[i]
		if f.Kind == kind && f.active(t) && rng.Float64() < f.Rate {
			return true
		}
	}
	return false
}

// lockstep runs ticks in virtual time: each tick waits for the reply to its
// state.
func (r *runner) lockstep(ctx context.Context) error {
	lastValid := time.Now()
	for !r.done() {
		if r.aborted(ctx) {
			break
		}
		r.drainLinkEvents()
		if r.outcome != "" {
			break
		}
		r.sense()
		if !r.exchange(ctx, &lastValid) {
			break
		}
		r.fresh = false
		var c protocol.Command
		if r.pending.popDue(r.tick, &c) {
			r.takeCommand(&c)
		}
		// A command that trips still gets its tick, with the zero torque of
		// the e-stop, so the log shows what was sent and what was applied.
		r.advance(time.Time{})
	}
	return nil
}

// exchange sends the tick's state and waits for the command that echoes its
// sequence number, resending after cfg.Resend and tripping the watchdog
// after cfg.Watchdog. It returns false when the run must end.
func (r *runner) exchange(ctx context.Context, lastValid *time.Time) bool {
	r.sendState()
	resendAt := time.Now().Add(r.cfg.Resend)
	looks := 0 // messages read past the watchdog
	for r.outcome == "" {
		if r.aborted(ctx) {
			return false
		}
		now := time.Now()
		wd := lastValid.Add(r.cfg.Watchdog)
		// Past the watchdog, read what is already waiting, without
		// waiting for more: after a stall of the rig itself the answer may
		// be in the buffer, and that is not the firmware's fault.
		final := !now.Before(wd)
		deadline := resendAt
		if wd.Before(deadline) {
			deadline = wd
		}
		err := r.conn.Recv(deadline, &r.msg)
		if err == nil && r.validReply(lastValid) {
			return true
		}
		if errors.Is(err, bridges.ErrTimeout) && deadline.After(now) {
			// A wait that ended far later than its deadline means the rig
			// process itself was not running (an overloaded host). A
			// lockstep run does not blame the firmware for that: the
			// watchdog counts only the time the rig was listening.
			if late := time.Since(deadline); late > stallSlack {
				*lastValid = lastValid.Add(late)
				continue // and look again: the answer may have come meanwhile
			}
		}
		if final {
			looks++
		}
		if (final && (errors.Is(err, bridges.ErrTimeout) || looks > finalLooks)) ||
			(errors.Is(err, bridges.ErrTimeout) && !time.Now().Before(wd)) {
			r.watchdog(time.Since(*lastValid))
			return false
		}
		switch {
		case err == nil:
			switch r.msg.Type {
			case protocol.TypeStop:
				r.firmwareStop(r.msg.Stop)
				return false
			case protocol.TypeGreeting:
				r.greetedAgain()
			}
			// A stale, dropped or corrupted command, a heartbeat, a repeated
			// greeting: keep waiting.
		case errors.Is(err, bridges.ErrTimeout):
			if !time.Now().Before(resendAt) {
				if r.rec != nil {
					r.rec.Flush() // rows must not sit in the buffer while the rig waits
				}
				r.counts.Resends++
				r.sendState()
				resendAt = time.Now().Add(r.cfg.Resend)
			}
			r.drainLinkEvents()
		case errors.Is(err, bridges.ErrDisconnected):
			// The link lost its peer and is trying to get it back: the link
			// events say so, and the watchdog decides whether to wait.
			r.disconnected(err)
		case errors.Is(err, bridges.ErrClosed):
			r.linkLost("link to the firmware closed")
			if r.outcome == "" {
				r.outcome, r.reason, r.stopCode = record.Aborted, "the link to the firmware closed", protocol.StopEStop
			}
			return false
		case errors.As(err, &r.fe):
			r.badFrame(r.fe.Reason)
		default:
			// An error the link does not classify: treat it as an outage.
			// If it lasts, the watchdog ends the run; the short pause keeps
			// a link that fails at once from spinning the loop.
			r.disconnected(err)
			time.Sleep(time.Millisecond)
		}
	}
	return false
}

// validReply checks a received message against the awaited sequence number
// and the drop and corrupt faults. A valid command is queued for its tick
// (now, or later under a latency fault) and resets the watchdog.
func (r *runner) validReply(lastValid *time.Time) bool {
	if r.msg.Type != protocol.TypeCommand {
		return false
	}
	if r.msg.Seq != r.seq {
		r.counts.StaleCommands++
		return false
	}
	if r.chance(FaultDrop, r.s.T, r.frng) {
		r.counts.DroppedCommand++
		return false
	}
	if r.chance(FaultCorrupt, r.s.T, r.frng) {
		r.counts.Corrupted++
		r.badFrame("injected corruption (a real link's CRC check rejects such a frame)")
		return false
	}
	*lastValid = time.Now()
	r.linkDown = false
	delay := r.latencyDelay(r.s.T, r.frng)
	k := int64(math.Round(delay.Seconds() * r.cfg.TickHz))
	if !r.pending.push(r.tick+k, &r.msg.Command) {
		r.counts.DroppedCommand++
	}
	return true
}

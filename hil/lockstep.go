package hil

// This file holds the lockstep clock: ticks in virtual time, each waiting
// for the command that answers its own state, with resends, the watchdog
// on the time the rig was listening, and commands held back by a latency
// fault counted in whole ticks.

import (
	"context"
	"math"
	"time"

	"gaitrig/bridges/protocol"
	"gaitrig/internal/hostload"
)

// finalLooks is how many waiting messages the loop reads, past the
// watchdog, before it trips: after a stall of the rig a stale answer (to a
// resent state) may sit in the link's buffer ahead of the valid one. The
// bound keeps a firmware that floods the link from holding the loop there;
// 64 is the in-process link's whole buffer.
const finalLooks = 64

// watchEarlyTicks is for how many exchanges after a slow one the loop
// reads the host's CPU pressure from the start of the wait rather than
// once the answer is slow: a busy host stays busy for a while, and
// pressure before the first reading cannot be credited.
const watchEarlyTicks = 1000

// lockstep runs the ticks in virtual time.
func (r *runner) lockstep(ctx context.Context) {
	src := &lockstepSource{r: r}
	r.ticks(ctx, virtualPacer{}, src)
}

// lockstepSource obtains each tick's command by waiting for the answer to
// the tick's own state.
type lockstepSource struct {
	r    *runner
	held commandRing // commands in flight under a latency fault, released by tick index
	take heldCommand // the command due this tick
}

// beforeState ends the run without a tick when link events ended it.
func (l *lockstepSource) beforeState(time.Time) bool { return !l.r.end.set() }

// sending exposes the answer to this state, and only it, to the link
// faults.
func (l *lockstepSource) sending(seq uint32) { l.r.sess.link.await(int64(seq)) }

// afterState waits for the answer and applies the command due this tick:
// the answer itself, or under a latency fault the one released now.
func (l *lockstepSource) afterState(ctx context.Context) bool {
	r := l.r
	if !l.exchange(ctx) {
		return false
	}
	if _, ok := l.held.takeDue(r.pt.tick, r.sess.seq, &l.take); ok {
		r.takeCommand(&l.take.cmd)
	}
	return true
}

// exchange waits for the command that echoes the state's sequence number,
// resending the state after cfg.Resend and tripping the watchdog after
// cfg.Watchdog. It returns false when the run must end.
//
// Simulated time waits for the firmware, so the watchdog counts only time
// in which the firmware could have answered: the time since the state
// went out, less what was the rig's own and less the time the host's CPUs
// were contended. The rig's own time is every wait that ended later than
// its deadline, however it ended (with a timeout, or with a message that
// had come meanwhile and was waiting when the host finally ran the rig),
// and its own work between waits (a resend, flushing rows to disk, link
// events). Reading the firmware's messages is not the rig's own: a
// firmware that floods stale answers still trips the watchdog. A busy
// host therefore does not trip it, while a firmware that is gone still
// does after cfg.Watchdog of listening on a quiet host.
func (l *lockstepSource) exchange(ctx context.Context) bool {
	r := l.r
	ss := &r.sess
	start := time.Now()
	resendAt := start.Add(r.cfg.Resend)
	looks := 0 // messages read past the watchdog
	var busy hostload.WaitCredit
	var own time.Duration // the rig's own time during this wait: its stalls and its work
	// charged is the firmware's answer time so far.
	charged := func(now time.Time) time.Duration { return now.Sub(start) - own - busy.Total() }
	// The loop's own code between two readings of the clock takes
	// microseconds; a gap longer than hostload.StallSlack there is the host not
	// running the rig (preempted, frozen), not the firmware being slow.
	mark := start
	step := func() time.Time {
		t := time.Now()
		if gap := t.Sub(mark); gap > hostload.StallSlack {
			own += gap
			r.hostStall(gap)
		}
		mark = t
		return t
	}
	// Watch the host's CPU pressure once the answer is slow (past the first
	// resend, or a quarter of the watchdog if that is sooner), or from the
	// start while the host has recently been slow: a reading costs a system
	// call, too much for every tick of a quiet run, and pressure before the
	// first reading cannot be credited.
	slowAt := start.Add(min(r.cfg.Resend, r.cfg.Watchdog/4))
	watchAt := slowAt
	if r.stalls.watchEarly > 0 {
		r.stalls.watchEarly--
		watchAt = start
	}
	slow := false // this answer is slow: the next watchEarlyTicks watch early
	for !r.end.set() {
		if r.aborted(ctx) {
			return false
		}
		now := step()
		if !busy.Started() && !now.Before(watchAt) {
			busy.Start(r.pressure)
		}
		if !slow && !now.Before(slowAt) {
			// Only a slow answer starts the count again; an exchange that
			// watched early because of an earlier one does not, or one slow
			// answer would cost a reading on every tick for the rest of
			// the run.
			slow = true
			r.stalls.watchEarly = watchEarlyTicks
		}
		// Past the watchdog, read what is already waiting, without
		// waiting for more: after a stall of the rig itself the answer may
		// be in the buffer, and that is not the firmware's fault.
		c := charged(now)
		final := c >= r.cfg.Watchdog
		wd := now.Add(r.cfg.Watchdog - c)
		if !final {
			// At least a millisecond per look: with the host's pressure
			// credited bit by bit, the watchdog's remaining time may stay
			// tiny, and the loop must not spin on it.
			wd = now.Add(max(r.cfg.Watchdog-c, time.Millisecond))
		}
		deadline := resendAt
		if wd.Before(deadline) {
			deadline = wd
		}
		if !busy.Started() && watchAt.Before(deadline) && r.pressure != nil {
			deadline = watchAt
		}
		err := ss.link.Recv(deadline, &ss.msg)
		// A wait that ended far later than its deadline means the rig
		// process itself was not running (an overloaded host), whether it
		// ended with a timeout or with a message that came meanwhile: that
		// time is not the firmware's.
		back := time.Now()
		due := deadline
		if due.Before(now) {
			due = now // a deadline already past: Recv only looked
		}
		stalled := false
		if late := back.Sub(due); late > hostload.StallSlack {
			own += late
			resendAt = resendAt.Add(late)
			r.hostStall(late)
			stalled = true
		}
		mark = back
		kind := classify(err, &ss.fe)
		if stalled && kind == linkTimeout {
			continue // and look again: the answer may have come meanwhile
		}
		if kind == linkOK && l.validReply() {
			return true
		}
		if final {
			looks++
		}
		if (final && (kind == linkTimeout || looks > finalLooks)) ||
			(kind == linkTimeout && charged(step()) >= r.cfg.Watchdog) {
			// Before blaming the firmware: time in which the host's CPUs
			// were contended is time a firmware in another process may
			// not have been run, so the watchdog does not count it either.
			busy.Credit(r.pressure)
			now := step()
			silent, c := now.Sub(start), charged(now)
			if c < r.cfg.Watchdog && silent < hostload.Limit(r.cfg.Watchdog) {
				// Waiting on: the resend must not wait with it, or a
				// firmware that lost the state (or the configuration
				// after a greeting) would never be asked again.
				looks = 0
				if !now.Before(resendAt) {
					resendAt = l.resend()
				}
				continue
			}
			if c < r.cfg.Watchdog {
				// The verdict: the credit over the whole wait, with the
				// host's busy CPUs rather than all of them.
				busy.Settle(r.pressure)
				c = charged(now)
			}
			if c < r.cfg.Watchdog {
				// The limit passed and the host never left the firmware a
				// watchdog's worth of CPU: whether it is gone cannot be
				// told on this host. Not a verdict on the firmware.
				r.hostBusy(silent, busy.Total())
				return false
			}
			r.watchdogContended(silent, silent-c)
			return false
		}
		switch kind {
		case linkOK:
			switch ss.msg.Type {
			case protocol.TypeStop:
				r.firmwareStop(ss.msg.Stop)
				return false
			case protocol.TypeGreeting:
				r.greetedAgain()
			}
			// A stale command, a heartbeat, a repeated greeting: keep
			// waiting. (Dropped and corrupted commands never get here: the
			// fault link lost them or made them frame errors.)
		case linkTimeout:
			// The rig's own work while it waits is not the firmware's time.
			t0 := step()
			if !t0.Before(resendAt) {
				resendAt = l.resend()
			}
			r.drainLinkEvents()
			mark = time.Now()
			own += mark.Sub(t0)
		case linkDisconnected:
			// The link lost its peer and is trying to get it back: the link
			// events say so, and the watchdog decides whether to wait.
			r.disconnected(err)
		case linkClosed:
			r.linkClosed()
			return false
		case linkFrame:
			r.badFrame(ss.fe.Reason)
		case linkOther:
			// An error the link does not classify: treat it as an outage.
			// If it lasts, the watchdog ends the run; the short pause keeps
			// a link that fails at once from spinning the loop.
			r.disconnected(err)
			time.Sleep(time.Millisecond)
		}
	}
	return false
}

// resend sends the state again (after flushing the rows, which must not
// sit in the buffer while the rig waits) and returns when the next resend
// is due.
func (l *lockstepSource) resend() time.Time {
	r := l.r
	if r.rec != nil {
		r.rec.Flush()
	}
	r.health.counts.Resends++
	r.sendState()
	return time.Now().Add(r.cfg.Resend)
}

// validReply checks a received message against the awaited sequence
// number. A valid command resets the watchdog and is held for its tick:
// now, or later under a latency fault (rounded to whole ticks, so a run
// stays bit-identical).
func (l *lockstepSource) validReply() bool {
	r := l.r
	m := &r.sess.msg
	if m.Type != protocol.TypeCommand {
		return false
	}
	if m.Seq != r.sess.seq {
		r.health.counts.StaleCommands++
		return false
	}
	r.validCommand()
	k := int64(math.Round(r.sess.link.delay.Seconds() * r.cfg.TickHz))
	l.held.put(&heldCommand{cmd: m.Command, seq: m.Seq, release: r.pt.tick + k})
	return true
}

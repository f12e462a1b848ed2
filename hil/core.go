package hil

// This file owns the tick core: the one sequence every tick runs through,
// whichever clock paces it. A clock is a pacer (when a tick starts) and a
// command source (how the tick's command is obtained); lockstep.go and
// wallclock.go hold the two clocks, and nothing else differs between them.

import (
	"context"
	"time"
)

// pacer decides when a tick starts.
type pacer interface {
	// wait blocks until the tick is due and returns the wall time it
	// started: the zero time in virtual time, which logs no wall time.
	wait(tick int64) time.Time
	// overran reports whether the tick that wait last started ended its
	// work after the next tick was due.
	overran() bool
}

// commandSource is how a clock obtains the tick's command from the
// firmware. The core sends the state between beforeState and afterState;
// each returns false when the run ends without this tick being stepped.
type commandSource interface {
	// beforeState runs before the state goes out. Wall-clock applies the
	// newest command that has arrived (it answers an earlier state) and
	// checks the watchdog.
	beforeState(wall time.Time) bool
	// sending is told the sequence number of the state about to go out.
	// Wall-clock times the round trip from here.
	sending(seq uint32)
	// afterState runs after the state went out. Lockstep waits for the
	// command that answers it and applies it.
	afterState(ctx context.Context) bool
}

// ticks runs the loop until an end condition or an outcome:
// pace → sense → send the state → obtain the command → check and apply the
// torques → step the plant → record → plant events → end conditions.
func (r *runner) ticks(ctx context.Context, p pacer, src commandSource) {
	// Every way out gives the tap's readers the last tick stepped, also a
	// return in the middle of a tick (an abort, a trip while waiting for
	// the command), so a live view or a scrape ends on what the summary
	// says, not on the last decimated snapshot.
	last := false
	defer func() {
		if !last {
			r.pt.latUS = nan // counted in the tap's histograms already
			r.tap(nil, time.Time{}, true)
		}
	}()
	for !r.done() {
		wall := p.wait(r.pt.tick)
		if r.aborted(ctx) {
			return
		}
		r.drainLinkEvents()
		r.fresh = false
		r.pt.latUS = nan
		if !src.beforeState(wall) {
			return
		}
		// A command that ended the run (a bad torque that trips) still gets
		// its tick, with the zero torque of the e-stop, so the log shows
		// what was sent and what was applied; no new state goes out.
		ended := r.end.set()
		if !ended {
			r.sense()
			r.sess.link.at(r.pt.s.T)
			src.sending(r.sess.seq)
			r.sendState()
			if !src.afterState(ctx) {
				return
			}
		}
		r.advance(wall)
		if ended {
			r.tap(p, wall, true)
			last = true
			return
		}
		if p.overran() {
			r.deadlineMiss()
		}
		last = r.done()
		r.tap(p, wall, last)
	}
}

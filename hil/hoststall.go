package hil

// This file owns the loop's measure of its own lateness: time in which the
// rig itself was not running (the host did not schedule it, or it was
// blocked outside its planned sleep), ticks that started late, and the
// host_stall alarm. The watchdog is charged only with time in which the
// firmware could have answered, so a stall of the host is never blamed on
// the firmware; a wall-clock stall longer than the watchdog spoils the run
// (outcome invalid) instead of tripping it.

import (
	"fmt"
	"time"

	"gaitrig/bridges/protocol"
	"gaitrig/record"
)

// maxStallEvents bounds the host_stall lines a run writes to events.jsonl
// (a host under load may stall the loop thousands of times); the summary
// counts them all.
const maxStallEvents = 20

// hostStalls is what the loop saw of its own lateness.
type hostStalls struct {
	total     time.Duration // time the loop was not running, summed over stalls above hostload.StallSlack
	longest   time.Duration
	count     int
	lateTicks int // wall-clock ticks that started a whole period or more after they were due
	logged    int // host_stall events written
	// watchEarly counts down the lockstep exchanges that read the host's
	// CPU pressure from the start of their wait, after a slow one
	// (lockstep.go).
	watchEarly int
}

// hostStall notes a stall of the rig of length d, seen at the current
// tick. In lockstep it costs nothing but time (simulated time waited), so
// it is logged and counted. In wall-clock a stall as long as the watchdog
// broke the real-time premise of the run: the firmware saw a gap the rig
// made, so the run says nothing about the firmware; host_stall is raised
// and, at its default severity, the run ends with outcome invalid.
func (r *runner) hostStall(d time.Duration) {
	hs := &r.stalls
	hs.count++
	hs.total += d
	hs.longest = max(hs.longest, d)
	ms := float64(d) / 1e6
	if r.cfg.Clock != Wallclock || d < r.cfg.Watchdog {
		if hs.logged < maxStallEvents && d >= r.cfg.Watchdog/2 {
			hs.logged++
			r.al.info(AlarmHostStall, r.pt.tick, r.pt.s.T,
				fmt.Sprintf("the rig itself was not running for %.1f ms (host load); not charged to the firmware's watchdog", ms),
				map[string]float64{"stall_ms": ms})
		}
		return
	}
	if r.al.raise(AlarmHostStall, r.pt.tick, r.pt.s.T, -1, -1, func() (string, map[string]float64) {
		return fmt.Sprintf("the rig itself was not running for %.1f ms, past the watchdog (%v): the host stalled the run, the firmware is not to blame; run it again", ms, r.cfg.Watchdog),
			map[string]float64{"stall_ms": ms, "watchdog_ms": float64(r.cfg.Watchdog) / 1e6}
	}) {
		r.invalid(fmt.Sprintf("host_stall: the rig was not running for %.1f ms", ms))
	}
}

// invalid ends the run with outcome invalid: the host, not the firmware,
// spoiled it. Torques go to zero as in an e-stop, and the firmware is told
// the run was aborted.
func (r *runner) invalid(reason string) {
	if r.end.set() {
		return
	}
	r.act.zero()
	r.end.end(record.Invalid, reason, protocol.StopAborted)
}

// hostBusy ends a lockstep run whose firmware stayed silent to the limit
// while the host's CPUs were contended for all but less than a watchdog of
// it: host_stall, outcome invalid (run it again on a quieter host). At
// severity warn the scenario asks for the watchdog's verdict instead.
func (r *runner) hostBusy(silent, contended time.Duration) {
	ms, cms := float64(silent)/1e6, float64(contended)/1e6
	if r.al.raise(AlarmHostStall, r.pt.tick, r.pt.s.T, -1, -1, func() (string, map[string]float64) {
		return fmt.Sprintf("no answer from the firmware for %.0f ms, %.0f ms of it with the host's CPUs contended: the host never left it a watchdog (%v) to answer in; not the firmware's fault, run it again", ms, cms, r.cfg.Watchdog),
			map[string]float64{"silent_ms": ms, "contended_ms": cms, "watchdog_ms": float64(r.cfg.Watchdog) / 1e6}
	}) {
		r.invalid(fmt.Sprintf("host_stall: no answer for %.0f ms on a contended host", ms))
		return
	}
	r.watchdogContended(silent, contended)
}

// watchdogContended trips the lockstep watchdog after silent with no
// answer, contended of which the host's CPUs were contended. The alarm
// says both, so a trip on a loaded host can be told from one on a quiet
// host; before the limit only the uncontended time is charged.
func (r *runner) watchdogContended(silent, contended time.Duration) {
	if contended <= 0 {
		r.watchdog(silent)
		return
	}
	ms, cms := float64(silent)/1e6, float64(contended)/1e6
	if r.al.raise(AlarmWatchdog, r.pt.tick, r.pt.s.T, -1, -1, func() (string, map[string]float64) {
		return fmt.Sprintf("no valid command from the firmware for %.1f ms, %.1f ms of it with the host busy (CPUs contended or the rig itself stalled; watchdog %v): e-stop", ms, cms, r.cfg.Watchdog),
			map[string]float64{"silent_ms": ms, "contended_ms": cms, "watchdog_ms": float64(r.cfg.Watchdog) / 1e6}
	}) {
		r.trip(protocol.StopWatchdog)
	}
}

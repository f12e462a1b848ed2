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
	"math"
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
	total     time.Duration // time the loop was not running, summed over stalls above stallSlack
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

// hostBusy follows the host's CPU pressure during one slow wait for an
// answer in lockstep.
type hostBusy struct {
	tried    bool // start was called
	watching bool
	p0       time.Duration // pressure reading when the wait became slow
	t0       time.Time     // when it was taken
	total    time.Duration // pressure credited to the watchdog so far
	s0       cpuTimes      // the host's CPU times at st0, for settle
	st0      time.Time     // when s0 was read: at the first credit (past a watchdog of silence)
	statOK   bool          // s0 was read
}

// start takes the first pressure reading of a slow wait.
func (b *hostBusy) start(p *cpuPressure) {
	if b.tried {
		return
	}
	b.tried = true
	if v, ok := p.some(); ok {
		b.watching, b.p0, b.t0 = true, v, time.Now()
	}
}

// credit returns the pressure time not yet credited since start.
func (b *hostBusy) credit(p *cpuPressure) time.Duration {
	if !b.watching {
		return 0
	}
	v, ok := p.some()
	if !ok {
		return 0
	}
	if !b.statOK {
		// The busy CPUs for settle, read here rather than at start: only
		// a wait this long may need them, and /proc/stat costs more to
		// read than the pressure file. Their share is a rate, so a window
		// that starts later measures it as well.
		b.s0, b.statOK = p.times()
		b.st0 = time.Now()
	}
	// The host-wide "some" figure is the per-CPU stall time averaged over
	// the non-idle CPUs (Linux PSI, Documentation/accounting/psi.rst): one
	// task waiting on one of N busy CPUs adds only 1/N of the time it
	// waited. The firmware may be that task, so the credit is the figure
	// times the CPU count, and never more than the time watched. That is
	// an upper bound (on a large, partly idle host a loose one), good for
	// deciding to wait on; the verdict at the limit uses settle.
	contended := (v - b.p0) * time.Duration(p.numCPU())
	if watched := time.Since(b.t0); contended > watched {
		contended = watched
	}
	more := contended - b.total
	if more <= 0 {
		return 0
	}
	b.total += more
	return more
}

// settle recomputes the credit over the whole slow wait, for the verdict
// at the limit, with the number of the host's CPUs that were busy instead
// of all of them (busyCPUs), and returns the new total. It may be less
// than what credit gave: credit's figure is an upper bound, fit to decide
// whether to wait on, but on a large host with some CPUs contended and
// most idle it would excuse a firmware that is gone, and the run would end
// invalid instead of tripped. Without /proc/stat the total stands.
func (b *hostBusy) settle(p *cpuPressure) time.Duration {
	if !b.watching || !b.statOK {
		return b.total
	}
	v, ok := p.some()
	s, sok := p.times()
	if !ok || !sok {
		return b.total
	}
	watched := time.Since(b.t0)
	n, ok := busyCPUs(cpuTimes{nonidle: s.nonidle - b.s0.nonidle, all: s.all - b.s0.all}, time.Since(b.st0))
	if !ok {
		return b.total
	}
	b.total = min(time.Duration(float64(v-b.p0)*n), watched)
	return b.total
}

// busyCPUs is how many of the host's CPUs were busy on average over a
// window of length w in which they spent d (from /proc/stat), one CPU's
// rounding (a unit of 1/userHZ s) added per CPU so the figure errs high,
// and at least 1.
//
// Why this and not the CPU count: the host-wide "some" figure of Linux PSI
// is the per-CPU stall time weighted by each CPU's non-idle time,
// sum(some_i * nonidle_i) / sum(nonidle_i) (kernel/sched/psi.c,
// collect_percpu_times; from memory of the kernel source, and what
// Documentation/accounting/psi.rst describes as an average over the
// non-idle CPUs). A task that waited T on CPU i, busy all the window,
// adds T * w / sum(nonidle): T / busy CPUs, not T / all CPUs. Multiplying
// back by the busy CPUs gives T; by the CPU count it gives T times all
// CPUs over busy ones, on a large, mostly idle host enough to excuse any
// silence.
func busyCPUs(d cpuTimes, w time.Duration) (float64, bool) {
	ticks := w.Seconds() * userHZ
	if ticks < 1 || d.all <= 0 || d.nonidle < 0 {
		return 0, false
	}
	cpus := math.Round(float64(d.all) / ticks)
	if cpus < 1 {
		return 0, false
	}
	n := (float64(d.nonidle) + cpus) / ticks
	return min(max(n, 1), cpus), true
}

// limit is how long the rig waits in all for an answer while the host is
// contended: twenty watchdogs, and at least a second (our choice: long
// past any firmware that is merely starved of a CPU on a loaded host, short
// enough that a firmware that is gone is still caught on a host that stays
// saturated). On a quiet host the pressure credit is nil and the
// scenario's watchdog holds exactly.
func (b *hostBusy) limit(watchdog time.Duration) time.Duration {
	return max(20*watchdog, time.Second)
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

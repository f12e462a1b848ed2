package hil

import (
	"gaitrig/internal/hostload"
	"time"
)

// spinWindow is how long before a deadline the pacer stops sleeping and
// spins. A thread woken from clock_nanosleep is late by some tens of
// microseconds on a loaded Linux host (measured here: see the package
// benchmarks), so a sleep that ends this early and a short spin land on
// the deadline far more tightly than a sleep alone.
const spinWindow = 50 * time.Microsecond

// waitUntil blocks until the monotonic clock reaches t: it sleeps until
// spinWindow before t, then spins. It returns how long it asked to sleep.
func waitUntil(t time.Time) time.Duration {
	d := time.Until(t) - spinWindow
	if d > 0 {
		sleepThread(d)
	} else {
		d = 0
	}
	for time.Now().Before(t) {
		// Pure spin: on a goroutine locked to its thread, Gosched would hand
		// the goroutine to another thread and back, which costs more than
		// the window itself.
	}
	return d
}

// timing holds the real-time figures of a run: command round trip, tick
// start lateness, deadline misses and the scheduling class. Only the
// wall-clock pacer and command source fill them; in lockstep they stay
// empty, since virtual time has no lateness.
type timing struct {
	latency  *Histogram // state sent → its command taken, injected latency included
	jitter   *Histogram // actual − scheduled tick start
	misses   uint64     // ticks whose work ended after the next tick was due
	realtime string     // the scheduling class granted, in words
}

// virtualPacer paces lockstep ticks: a tick starts as soon as the last
// one is done, and none is ever late.
type virtualPacer struct{}

func (virtualPacer) wait(int64) time.Time { return time.Time{} }
func (virtualPacer) overran() bool        { return false }

// realPacer paces wall-clock ticks on the monotonic clock, one period
// apart from start, and records each tick's lateness and the stalls of its
// thread.
type realPacer struct {
	start  time.Time     // when tick 0 is due
	period time.Duration // tick period
	due    time.Time     // when the tick wait last started was due
	jitter *Histogram

	// From one tick start to the next the loop's thread either runs (its
	// CPU time grows), sleeps as asked, or was stalled: the rest of the
	// wall time. prev* are the clocks at the last tick start.
	prevWall        time.Time
	prevCPU, prevBt int64
	clocks          bool          // the thread clocks can be read
	stall           time.Duration // stall seen in the interval that ended at the last tick start (0 if below hostload.StallSlack)
	late            bool          // the last tick started a whole period or more after it was due
}

func (p *realPacer) wait(tick int64) time.Time {
	p.due = p.start.Add(time.Duration(tick) * p.period)
	slept := waitUntil(p.due)
	now := time.Now()
	lateness := now.Sub(p.due)
	p.jitter.Add(lateness)
	p.late = lateness >= p.period
	cpu, boot, ok := threadClocks()
	p.stall = 0
	if ok && p.clocks {
		wall := now.Sub(p.prevWall)
		notRunning := wall - time.Duration(cpu-p.prevCPU) - slept
		suspended := time.Duration(boot-p.prevBt) - wall
		p.stall = max(notRunning, 0) + max(suspended, 0)
	} else if !ok {
		// No thread clocks: only a late start shows a stall.
		p.stall = lateness
	}
	if p.stall <= hostload.StallSlack {
		p.stall = 0
	}
	p.prevWall, p.prevCPU, p.prevBt, p.clocks = now, cpu, boot, ok
	return now
}

func (p *realPacer) overran() bool { return time.Now().After(p.due.Add(p.period)) }

package hil

import "time"

// spinWindow is how long before a deadline the pacer stops sleeping and
// spins. A thread woken from clock_nanosleep is late by some tens of
// microseconds on a loaded Linux host (measured here: see the package
// benchmarks), so a sleep that ends this early and a short spin land on
// the deadline far more tightly than a sleep alone.
const spinWindow = 50 * time.Microsecond

// waitUntil blocks until the monotonic clock reaches t: it sleeps until
// spinWindow before t, then spins.
func waitUntil(t time.Time) {
	if d := time.Until(t) - spinWindow; d > 0 {
		sleepThread(d)
	}
	for time.Now().Before(t) {
		// Pure spin: on a goroutine locked to its thread, Gosched would hand
		// the goroutine to another thread and back, which costs more than
		// the window itself.
	}
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
// apart from start, and records each tick's lateness.
type realPacer struct {
	start  time.Time     // when tick 0 is due
	period time.Duration // tick period
	due    time.Time     // when the tick wait last started was due
	jitter *Histogram
}

func (p *realPacer) wait(tick int64) time.Time {
	p.due = p.start.Add(time.Duration(tick) * p.period)
	waitUntil(p.due)
	now := time.Now()
	p.jitter.Add(now.Sub(p.due))
	return now
}

func (p *realPacer) overran() bool { return time.Now().After(p.due.Add(p.period)) }

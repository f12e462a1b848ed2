package hostload

import "time"

// StallSlack is how much later than its deadline a wait may end before the
// lateness counts as the waiter's own stall (the host did not run the
// waiter; an answer may have waited in the link's buffer meanwhile), not
// the firmware's time. Go timer wake-ups are late by up to about a
// millisecond on a busy host (measured when the rig's lockstep loop was
// written), so 5 ms is well clear of normal lateness.
const StallSlack = 5 * time.Millisecond

// WaitCredit follows the host's CPU pressure during one wait for an answer
// and says how much of the wait to credit, that is, not to charge to the
// firmware's watchdog. Its zero value is ready; use one per wait.
//
// A waiter charges the firmware with the time since the request went out,
// less its own stalls and less Total; when that reaches the watchdog it
// calls Credit and waits on while the charge stays under the watchdog and
// the wait under Limit; at the limit it calls Settle for the verdict. If
// even then the charge is under the watchdog, the host never left the
// firmware a watchdog's worth of CPU: whether it is gone cannot be told on
// this host, and the verdict is the host's (host_stall), not the
// firmware's.
type WaitCredit struct {
	started  bool
	watching bool
	p0       time.Duration // pressure reading at Start
	t0       time.Time     // when it was taken
	total    time.Duration // pressure credited so far
	s0       CPUTimes      // the host's CPU times at st0, for Settle
	st0      time.Time     // when s0 was read: at the first Credit
	statOK   bool          // s0 was read
}

// Started reports whether Start was called.
func (w *WaitCredit) Started() bool { return w.started }

// Total is the pressure credited so far.
func (w *WaitCredit) Total() time.Duration { return w.total }

// Start takes the first pressure reading; pressure before it cannot be
// credited. Only the first call counts.
func (w *WaitCredit) Start(p *Pressure) {
	if w.started {
		return
	}
	w.started = true
	if v, ok := p.Some(); ok {
		w.watching, w.p0, w.t0 = true, v, time.Now()
	}
}

// Credit returns the pressure time not yet credited since Start, and adds
// it to Total.
func (w *WaitCredit) Credit(p *Pressure) time.Duration {
	if !w.watching {
		return 0
	}
	v, ok := p.Some()
	if !ok {
		return 0
	}
	if !w.statOK {
		// The busy CPUs for Settle, read here rather than at Start: only
		// a wait this long may need them, and /proc/stat costs more to
		// read than the pressure file. Their share is a rate, so a window
		// that starts later measures it as well.
		w.s0, w.statOK = p.Times()
		w.st0 = time.Now()
	}
	// The host-wide "some" figure is the per-CPU stall time averaged over
	// the non-idle CPUs (BusyCPUs): one task waiting on one of N busy CPUs
	// adds only 1/N of the time it waited. The firmware may be that task,
	// so the credit is the figure times the CPU count, and never more than
	// the time watched. That is an upper bound (on a large, partly idle
	// host a loose one), good for deciding to wait on; the verdict at the
	// limit uses Settle.
	contended := (v - w.p0) * time.Duration(p.numCPU())
	if watched := time.Since(w.t0); contended > watched {
		contended = watched
	}
	more := contended - w.total
	if more <= 0 {
		return 0
	}
	w.total += more
	return more
}

// Settle recomputes the credit over the whole wait, for the verdict at the
// limit, with the number of the host's CPUs that were busy (BusyCPUs)
// instead of all of them, and returns the new Total. It may be less than
// what Credit gave: Credit's figure is an upper bound, fit to decide
// whether to wait on, but on a large host with some CPUs contended and
// most idle it would excuse a firmware that is gone. Without /proc/stat
// the total stands.
func (w *WaitCredit) Settle(p *Pressure) time.Duration {
	if !w.watching || !w.statOK {
		return w.total
	}
	v, ok := p.Some()
	s, sok := p.Times()
	if !ok || !sok {
		return w.total
	}
	watched := time.Since(w.t0)
	n, ok := BusyCPUs(CPUTimes{Nonidle: s.Nonidle - w.s0.Nonidle, All: s.All - w.s0.All}, time.Since(w.st0))
	if !ok {
		return w.total
	}
	w.total = min(time.Duration(float64(v-w.p0)*n), watched)
	return w.total
}

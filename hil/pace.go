package hil

import (
	"runtime"
	"time"
)

// spinWindow is how long before a deadline the pacer stops sleeping and
// spins: Go's timer wake-ups on a loaded Linux host are late by tens of
// microseconds (common practice for soft real-time loops), so a sleep that
// ends this early and a short spin land on the deadline far more tightly
// than a sleep alone.
const spinWindow = 50 * time.Microsecond

// waitUntil blocks until the monotonic clock reaches t: it sleeps until
// spinWindow before t, then spins, yielding the processor so the receiver
// goroutine can still run on a 2-core host.
func waitUntil(t time.Time) {
	if d := time.Until(t) - spinWindow; d > 0 {
		time.Sleep(d)
	}
	for time.Now().Before(t) {
		runtime.Gosched()
	}
}

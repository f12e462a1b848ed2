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

//go:build linux

package hil

import (
	"time"

	"golang.org/x/sys/unix"
)

// sleepThread puts the calling OS thread to sleep with clock_nanosleep on
// the monotonic clock (the one time.Now and the deadlines use), a
// high-resolution timer. time.Sleep would go through the Go runtime's
// timers, whose wake-ups land up to a millisecond late (measured on this
// host: about 0.5 ms median overshoot for sub-millisecond sleeps), which is
// a whole tick at 1 kHz.
func sleepThread(d time.Duration) {
	ts := unix.NsecToTimespec(int64(d))
	for {
		var rem unix.Timespec
		err := unix.ClockNanosleep(unix.CLOCK_MONOTONIC, 0, &ts, &rem)
		if err != unix.EINTR {
			return
		}
		ts = rem
	}
}

// threadClocks reads the calling thread's CPU time and the boot-time clock,
// in nanoseconds. Wall time that passed on the monotonic clock while the
// thread neither ran nor slept of its own accord was taken from it by the
// host; boot time that passed beyond the monotonic clock is time the whole
// machine was suspended (the monotonic clock stops then, a board does not).
// ok is false when either clock cannot be read.
func threadClocks() (cpu, boot int64, ok bool) {
	var c, b unix.Timespec
	if unix.ClockGettime(unix.CLOCK_THREAD_CPUTIME_ID, &c) != nil || unix.ClockGettime(unix.CLOCK_BOOTTIME, &b) != nil {
		return 0, 0, false
	}
	return c.Nano(), b.Nano(), true
}

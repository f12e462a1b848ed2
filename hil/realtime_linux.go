//go:build linux

package hil

import (
	"fmt"

	"golang.org/x/sys/unix"
)

// requestRealtime asks the kernel to run the calling OS thread in the
// SCHED_FIFO real-time class at the given priority. The caller must have
// locked its goroutine to the thread. It reports what happened in words for
// the run log: most desktop and CI hosts refuse without CAP_SYS_NICE or an
// rtprio limit, and the run goes on in the normal class.
func requestRealtime(priority int) (granted bool, detail string) {
	attr := unix.SchedAttr{
		Size:     unix.SizeofSchedAttr,
		Policy:   unix.SCHED_FIFO,
		Priority: uint32(priority),
	}
	// pid 0 is the calling thread.
	if err := unix.SchedSetAttr(0, &attr, 0); err != nil {
		return false, fmt.Sprintf("SCHED_FIFO priority %d refused (%v); running in the normal scheduling class, expect more jitter", priority, err)
	}
	return true, fmt.Sprintf("SCHED_FIFO priority %d granted", priority)
}

// dropRealtime returns the calling thread to the normal class so the thread
// does not keep real-time priority after the loop unlocks it.
func dropRealtime() {
	attr := unix.SchedAttr{Size: unix.SizeofSchedAttr, Policy: unix.SCHED_NORMAL}
	_ = unix.SchedSetAttr(0, &attr, 0)
}

//go:build !linux

package hil

import "time"

// sleepThread sleeps with the Go runtime's timer where clock_nanosleep is
// not used.
func sleepThread(d time.Duration) { time.Sleep(d) }

// threadClocks is not available here: the pacer then sees only how late a
// tick started.
func threadClocks() (cpu, boot int64, ok bool) { return 0, 0, false }

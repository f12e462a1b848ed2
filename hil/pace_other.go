//go:build !linux

package hil

import "time"

// sleepThread sleeps with the Go runtime's timer where clock_nanosleep is
// not used.
func sleepThread(d time.Duration) { time.Sleep(d) }

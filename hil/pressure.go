package hil

// This file reads the host's CPU pressure: the kernel's count (Linux PSI,
// /proc/pressure/cpu) of the time in which at least one runnable task
// waited for a CPU. A firmware in another process (the C firmware, socat,
// a broker) may have been that task, so time under pressure is time in
// which a silent firmware cannot be told from a starved one.

import (
	"bytes"
	"os"
	"time"
)

// pressureFile is where Linux reports CPU pressure (kernel 4.20 and later,
// with PSI enabled).
const pressureFile = "/proc/pressure/cpu"

// cpuPressure reads the cumulative "some" stall time of the host's CPUs.
// It keeps the file open and reads it in place, so a reading allocates
// nothing; with no PSI on the host it reports nothing and the loop then
// counts only its own stalls.
type cpuPressure struct {
	f    *os.File
	buf  [256]byte
	fake func() (time.Duration, bool) // tests: stands in for the file
}

// openPressure opens the pressure file; nil when the host has none.
func openPressure() *cpuPressure {
	f, err := os.Open(pressureFile)
	if err != nil {
		return nil
	}
	p := &cpuPressure{f: f}
	if _, ok := p.some(); !ok {
		f.Close()
		return nil
	}
	return p
}

// some returns the cumulative time in which some runnable task waited for
// a CPU.
func (p *cpuPressure) some() (time.Duration, bool) {
	if p == nil {
		return 0, false
	}
	if p.fake != nil {
		return p.fake()
	}
	n, _ := p.f.ReadAt(p.buf[:], 0)
	return parseSomeTotal(p.buf[:n])
}

// parseSomeTotal finds "total=N" (µs) on the line that starts with "some".
func parseSomeTotal(b []byte) (time.Duration, bool) {
	line, _, _ := bytes.Cut(b, []byte("\n"))
	if !bytes.HasPrefix(line, []byte("some ")) {
		return 0, false
	}
	i := bytes.Index(line, []byte("total="))
	if i < 0 {
		return 0, false
	}
	// Digits by hand: strconv would copy the bytes to a string.
	var v int64
	digits := line[i+len("total="):]
	for _, c := range digits {
		if c < '0' || c > '9' || v > (1<<62)/10 {
			return 0, false
		}
		v = v*10 + int64(c-'0')
	}
	if len(digits) == 0 {
		return 0, false
	}
	return time.Duration(v) * time.Microsecond, true
}

func (p *cpuPressure) close() {
	if p != nil && p.f != nil {
		p.f.Close()
	}
}

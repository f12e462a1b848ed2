package hil

// This file reads the host's CPU pressure: the kernel's count (Linux PSI,
// /proc/pressure/cpu) of the time in which at least one runnable task
// waited for a CPU. A firmware in another process (the C firmware, socat,
// a broker) may have been that task, so time under pressure is time in
// which a silent firmware cannot be told from a starved one.

import (
	"bytes"
	"os"
	"runtime"
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
	// stat is /proc/stat, read for the host's busy CPUs (busy.go's
	// settle); nil without it. fakeStat stands in for it in tests.
	stat     *os.File
	fakeStat func() (cpuTimes, bool)
	cpus     int // tests: the host's CPU count; 0 means runtime.NumCPU()
}

// numCPU is the CPU count the credit multiplies the pressure by.
func (p *cpuPressure) numCPU() int {
	if p != nil && p.cpus > 0 {
		return p.cpus
	}
	return runtime.NumCPU()
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
	if st, err := os.Open(statFile); err == nil {
		p.stat = st
		if _, ok := p.times(); !ok {
			st.Close()
			p.stat = nil
		}
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
	if p != nil && p.stat != nil {
		p.stat.Close()
	}
}

// statFile is where Linux reports the time its CPUs spent in each state.
const statFile = "/proc/stat"

// userHZ is the unit of /proc/stat: 1/100 s on every Linux architecture
// Go supports (USER_HZ; proc(5)).
const userHZ = 100

// cpuTimes is the first line of /proc/stat: the time all the host's CPUs
// together spent busy (user, nice, system, irq, softirq, steal) and
// waiting for I/O (a CPU that PSI counts as not idle when a task waits on
// it), and in all states, in units of 1/userHZ s.
type cpuTimes struct {
	nonidle, all int64
}

// times reads the host's CPU times; false without /proc/stat.
func (p *cpuPressure) times() (cpuTimes, bool) {
	if p == nil {
		return cpuTimes{}, false
	}
	if p.fakeStat != nil {
		return p.fakeStat()
	}
	if p.stat == nil {
		return cpuTimes{}, false
	}
	n, _ := p.stat.ReadAt(p.buf[:], 0)
	return parseCPUTimes(p.buf[:n])
}

// parseCPUTimes reads the aggregate "cpu" line of /proc/stat: user nice
// system idle iowait irq softirq steal (guest time is already in user).
func parseCPUTimes(b []byte) (cpuTimes, bool) {
	line, _, _ := bytes.Cut(b, []byte("\n"))
	if !bytes.HasPrefix(line, []byte("cpu ")) {
		return cpuTimes{}, false
	}
	// Fields by hand: bytes.Fields would allocate.
	var f [8]int64
	k, in := 0, false
	for _, c := range line[4:] {
		switch {
		case c == ' ':
			in = false
			continue
		case c < '0' || c > '9':
			return cpuTimes{}, false
		}
		if !in {
			if k == len(f) {
				break
			}
			in = true
			k++
		}
		if f[k-1] > (1<<62)/10 {
			return cpuTimes{}, false
		}
		f[k-1] = f[k-1]*10 + int64(c-'0')
	}
	if k < len(f) {
		return cpuTimes{}, false
	}
	idle := f[3]
	nonidle := f[0] + f[1] + f[2] + f[4] + f[5] + f[6] + f[7]
	return cpuTimes{nonidle: nonidle, all: nonidle + idle}, true
}

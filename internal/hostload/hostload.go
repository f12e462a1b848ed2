// Package hostload tells a silent firmware from a starved one. It reads the
// host's CPU pressure (Linux PSI, /proc/pressure/cpu: the time in which at
// least one runnable task waited for a CPU) and the host's CPU times
// (/proc/stat), and from them works out how much of one wait for an answer
// the firmware may not have been run at all. A firmware in another process
// (the C firmware, socat between two ptys, a broker) may have been the
// task that waited, so that time is not charged to its watchdog.
//
// The rig's lockstep loop (package hil) and the conformance battery both
// judge answers with it, so a loaded bench host or CI runner never fails a
// firmware that answered as soon as it was run. On a host without PSI (not
// Linux, or PSI disabled) Open returns nil, every method of a nil
// *Pressure reports nothing, and a watchdog holds exactly.
package hostload

import (
	"bytes"
	"math"
	"os"
	"runtime"
	"time"
)

// pressureFile is where Linux reports CPU pressure (kernel 4.20 and later,
// with PSI enabled).
const pressureFile = "/proc/pressure/cpu"

// statFile is where Linux reports the time its CPUs spent in each state.
const statFile = "/proc/stat"

// UserHZ is the unit of /proc/stat: 1/100 s on every Linux architecture Go
// supports (USER_HZ; proc(5)).
const UserHZ = 100

// Pressure reads the cumulative "some" stall time of the host's CPUs and
// the host's CPU times. It keeps both files open and reads them in place,
// so a reading allocates nothing. A Pressure is for one goroutine at a
// time.
type Pressure struct {
	f    *os.File
	stat *os.File // nil without /proc/stat
	buf  [256]byte
	// Stand-ins of Fake, for tests.
	fakeSome  func() (time.Duration, bool)
	fakeTimes func() (CPUTimes, bool)
	cpus      int // the host's CPU count; 0 means runtime.NumCPU()
}

// Open opens the host's pressure file; nil when the host has none.
func Open() *Pressure {
	f, err := os.Open(pressureFile)
	if err != nil {
		return nil
	}
	p := &Pressure{f: f}
	if _, ok := p.Some(); !ok {
		f.Close()
		return nil
	}
	if st, err := os.Open(statFile); err == nil {
		p.stat = st
		if _, ok := p.Times(); !ok {
			st.Close()
			p.stat = nil
		}
	}
	return p
}

// Fake returns a Pressure that reports some and times (nil: no /proc/stat)
// instead of the host's files, on a host of cpus CPUs (0: this host's
// count). Tests use it to plant a quiet or a contended host, so that a
// verdict on a silent firmware does not depend on the load of the machine
// running the test.
func Fake(cpus int, some func() (time.Duration, bool), times func() (CPUTimes, bool)) *Pressure {
	return &Pressure{fakeSome: some, fakeTimes: times, cpus: cpus}
}

// Quiet returns a Pressure of a host whose CPUs are never contended: a
// watchdog judged with it holds exactly.
func Quiet() *Pressure {
	return Fake(0, func() (time.Duration, bool) { return 0, true }, nil)
}

// Close closes the files; a nil Pressure does nothing.
func (p *Pressure) Close() {
	if p == nil {
		return
	}
	if p.f != nil {
		p.f.Close()
	}
	if p.stat != nil {
		p.stat.Close()
	}
}

// numCPU is the CPU count the first credit multiplies the pressure by.
func (p *Pressure) numCPU() int {
	if p.cpus > 0 {
		return p.cpus
	}
	return runtime.NumCPU()
}

// Some returns the cumulative time in which some runnable task waited for
// a CPU; false on a nil Pressure or an unreadable file.
func (p *Pressure) Some() (time.Duration, bool) {
	if p == nil {
		return 0, false
	}
	if p.fakeSome != nil {
		return p.fakeSome()
	}
	if p.f == nil {
		return 0, false
	}
	n, _ := p.f.ReadAt(p.buf[:], 0)
	return parseSomeTotal(p.buf[:n])
}

// Times reads the host's CPU times; false without /proc/stat.
func (p *Pressure) Times() (CPUTimes, bool) {
	if p == nil {
		return CPUTimes{}, false
	}
	if p.fakeTimes != nil {
		return p.fakeTimes()
	}
	if p.stat == nil {
		return CPUTimes{}, false
	}
	n, _ := p.stat.ReadAt(p.buf[:], 0)
	return parseCPUTimes(p.buf[:n])
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

// CPUTimes is the first line of /proc/stat: the time all the host's CPUs
// together spent busy (user, nice, system, irq, softirq, steal) and
// waiting for I/O (a CPU that PSI counts as not idle when a task waits on
// it), and in all states, in units of 1/UserHZ s.
type CPUTimes struct {
	// Nonidle is the busy and I/O-wait time of all CPUs together.
	Nonidle int64
	// All is the time of all CPUs together in every state.
	All int64
}

// parseCPUTimes reads the aggregate "cpu" line of /proc/stat: user nice
// system idle iowait irq softirq steal (guest time is already in user).
func parseCPUTimes(b []byte) (CPUTimes, bool) {
	line, _, _ := bytes.Cut(b, []byte("\n"))
	if !bytes.HasPrefix(line, []byte("cpu ")) {
		return CPUTimes{}, false
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
			return CPUTimes{}, false
		}
		if !in {
			if k == len(f) {
				break
			}
			in = true
			k++
		}
		if f[k-1] > (1<<62)/10 {
			return CPUTimes{}, false
		}
		f[k-1] = f[k-1]*10 + int64(c-'0')
	}
	if k < len(f) {
		return CPUTimes{}, false
	}
	idle := f[3]
	nonidle := f[0] + f[1] + f[2] + f[4] + f[5] + f[6] + f[7]
	return CPUTimes{Nonidle: nonidle, All: nonidle + idle}, true
}

// BusyCPUs is how many of the host's CPUs were busy on average over a
// window of length w in which they spent d (from /proc/stat), one CPU's
// rounding (a unit of 1/UserHZ s) added per CPU so the figure errs high,
// and at least 1; false when the window is too short to say.
//
// Why this and not the CPU count: the host-wide "some" figure of Linux PSI
// is the per-CPU stall time weighted by each CPU's non-idle time,
// sum(some_i * nonidle_i) / sum(nonidle_i) (kernel/sched/psi.c,
// collect_percpu_times; from memory of the kernel source, and what
// Documentation/accounting/psi.rst describes as an average over the
// non-idle CPUs). A task that waited T on CPU i, busy all the window,
// adds T * w / sum(nonidle): T / busy CPUs, not T / all CPUs. Multiplying
// back by the busy CPUs gives T; by the CPU count it gives T times all
// CPUs over busy ones, on a large, mostly idle host enough to excuse any
// silence.
func BusyCPUs(d CPUTimes, w time.Duration) (float64, bool) {
	ticks := w.Seconds() * UserHZ
	if ticks < 1 || d.All <= 0 || d.Nonidle < 0 {
		return 0, false
	}
	cpus := math.Round(float64(d.All) / ticks)
	if cpus < 1 {
		return 0, false
	}
	n := (float64(d.Nonidle) + cpus) / ticks
	return min(max(n, 1), cpus), true
}

// Limit is how long a waiter waits in all for an answer while the host is
// contended: twenty watchdogs, and at least a second (our choice: long
// past any firmware that is merely starved of a CPU on a loaded host,
// short enough that a firmware that is gone is still caught on a host that
// stays saturated). On a quiet host the credit is nil and the watchdog
// holds exactly.
func Limit(watchdog time.Duration) time.Duration {
	return max(20*watchdog, time.Second)
}

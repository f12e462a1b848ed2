package hostload

import (
	"math"
	"testing"
	"time"
)

func TestParseSomeTotal(t *testing.T) {
	tests := []struct {
		in   string
		want time.Duration
		ok   bool
	}{
		// The layout of /proc/pressure/cpu (Linux Documentation/accounting/psi.rst).
		{"some avg10=94.12 avg60=85.44 avg300=56.99 total=1310661966\nfull avg10=0.00 avg60=0.00 avg300=0.00 total=0\n", 1310661966 * time.Microsecond, true},
		{"some avg10=0.00 avg60=0.00 avg300=0.00 total=0\n", 0, true},
		{"full avg10=0.00 avg60=0.00 avg300=0.00 total=5\n", 0, false},
		{"some avg10=0.00 total=\n", 0, false},
		{"some avg10=0.00 total=12x\n", 0, false},
		{"", 0, false},
	}
	for _, tc := range tests {
		got, ok := parseSomeTotal([]byte(tc.in))
		if got != tc.want || ok != tc.ok {
			t.Errorf("%q: %v %v, want %v %v", tc.in, got, ok, tc.want, tc.ok)
		}
	}
}

func TestParseCPUTimes(t *testing.T) {
	tests := []struct {
		in   string
		want CPUTimes
		ok   bool
	}{
		// The layout of /proc/stat (proc(5)): user nice system idle iowait
		// irq softirq steal guest guest_nice.
		{"cpu  1320399 20406 249564 357636 5338 0 4722 3754 0 0\ncpu0 656854 9610 124089 185096 1897 0 1106 1882 0 0\n",
			CPUTimes{Nonidle: 1320399 + 20406 + 249564 + 5338 + 0 + 4722 + 3754, All: 1320399 + 20406 + 249564 + 357636 + 5338 + 0 + 4722 + 3754}, true},
		{"cpu  1 2 3 4 5 6 7 8\n", CPUTimes{Nonidle: 1 + 2 + 3 + 5 + 6 + 7 + 8, All: 36}, true},
		{"cpu  1 2 3 4\n", CPUTimes{}, false},
		{"cpu0 1 2 3 4 5 6 7 8\n", CPUTimes{}, false},
		{"cpu  1 2 x 4 5 6 7 8\n", CPUTimes{}, false},
		{"", CPUTimes{}, false},
	}
	for _, tc := range tests {
		got, ok := parseCPUTimes([]byte(tc.in))
		if got != tc.want || ok != tc.ok {
			t.Errorf("%q: %+v %v, want %+v %v", tc.in, got, ok, tc.want, tc.ok)
		}
	}
}

// BusyCPUs against the figures worked out by hand.
func TestBusyCPUs(t *testing.T) {
	tests := []struct {
		d    CPUTimes
		w    time.Duration
		want float64
		ok   bool
	}{
		// 1 s = 100 ticks; 64 CPUs (6400 ticks), 800 ticks busy: 8 CPUs,
		// plus one tick per CPU for rounding: (800+64)/100.
		{CPUTimes{Nonidle: 800, All: 6400}, time.Second, 8.64, true},
		// 2 CPUs, both busy: (200+2)/100 capped at the 2 CPUs.
		{CPUTimes{Nonidle: 200, All: 200}, time.Second, 2, true},
		// An idle host: at least 1.
		{CPUTimes{Nonidle: 0, All: 6400}, time.Second, 1, true},
		// A window shorter than one tick says nothing.
		{CPUTimes{Nonidle: 1, All: 2}, 5 * time.Millisecond, 0, false},
		{CPUTimes{}, time.Second, 0, false},
	}
	for _, tc := range tests {
		got, ok := BusyCPUs(tc.d, tc.w)
		if ok != tc.ok || math.Abs(got-tc.want) > 1e-9 {
			t.Errorf("BusyCPUs(%+v, %v) = %v %v, want %v %v", tc.d, tc.w, got, ok, tc.want, tc.ok)
		}
	}
}

// Readings happen inside a tick's wait in the rig's loop; they may not
// allocate.
func TestReadingsDoNotAllocate(t *testing.T) {
	p := Open()
	if p == nil {
		t.Log("no CPU pressure file on this host: a nil Pressure is read")
	}
	defer p.Close()
	if n := testing.AllocsPerRun(200, func() { p.Some(); p.Times() }); n != 0 {
		t.Fatalf("reading the host's pressure allocates %.1f times", n)
	}
}

// A nil Pressure (a host without PSI) credits nothing: the watchdog holds
// exactly.
func TestNilPressureCreditsNothing(t *testing.T) {
	var p *Pressure
	var w WaitCredit
	w.Start(p)
	if !w.Started() || w.Credit(p) != 0 || w.Settle(p) != 0 || w.Total() != 0 {
		t.Fatalf("a host without PSI credited %v", w.Total())
	}
	p.Close() // must not panic
}

// manualHost is a host whose figures the test sets: the PSI total and the
// CPU times, read through Fake.
type manualHost struct {
	some  time.Duration
	times CPUTimes
}

func (h *manualHost) pressure(cpus int) *Pressure {
	return Fake(cpus, func() (time.Duration, bool) { return h.some, true },
		func() (CPUTimes, bool) { return h.times, true })
}

// Credit multiplies the PSI figure by the CPU count, never beyond the time
// watched, and counts each bit of pressure once; Settle weighs it by the
// busy CPUs instead. The figures are worked by hand from the definitions
// in BusyCPUs's comment.
func TestWaitCreditAndSettle(t *testing.T) {
	h := &manualHost{some: time.Second}
	p := h.pressure(64)
	var w WaitCredit
	w.Start(p)
	// 1 ms of PSI on a 64-CPU host is up to 64 ms of one task's waiting,
	// but no more than the time watched (a few µs here): the cap holds.
	h.some += time.Millisecond
	c1 := w.Credit(p)
	if watched := time.Since(w.t0); c1 <= 0 || c1 > watched {
		t.Fatalf("first credit %v, want in (0, %v]", c1, watched)
	}
	time.Sleep(100 * time.Millisecond) // the cap now lies past 64 ms
	if c2 := w.Credit(p); c1+c2 != 64*time.Millisecond || w.Total() != 64*time.Millisecond {
		t.Fatalf("credits %v + %v, total %v; want 64 ms in all", c1, c2, w.Total())
	}
	if c3 := w.Credit(p); c3 != 0 {
		t.Fatalf("the same pressure credited twice: %v more", c3)
	}
	// Settle over one second of CPU times in which 8 of the 64 CPUs were
	// busy: the 1 ms of PSI weighs (800+64)/100 = 8.64 CPUs, 8.64 ms.
	h.times = CPUTimes{Nonidle: h.times.Nonidle + 800, All: h.times.All + 6400}
	w.st0 = w.st0.Add(-time.Second + time.Since(w.st0)) // the CPU times' window: one second
	got := w.Settle(p)
	// The window is read from the clock again inside Settle: a preemption
	// between here and there widens it a little, so 2 % is allowed.
	if want := time.Duration(8.64 * float64(time.Millisecond)); math.Abs(float64(got-want)) > 0.02*float64(want) {
		t.Fatalf("settled credit %v, want %v (8.64 busy CPUs × 1 ms)", got, want)
	}
}

// Limit is twenty watchdogs, at least a second.
func TestLimit(t *testing.T) {
	for _, tc := range []struct{ wd, want time.Duration }{
		{10 * time.Millisecond, time.Second},
		{50 * time.Millisecond, time.Second},
		{time.Second, 20 * time.Second},
	} {
		if got := Limit(tc.wd); got != tc.want {
			t.Errorf("Limit(%v) = %v, want %v", tc.wd, got, tc.want)
		}
	}
}

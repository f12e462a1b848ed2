package hil

import (
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

// Reading the pressure and the thread clocks happens inside a tick's wait;
// neither may allocate.
func TestHostClocksDoNotAllocate(t *testing.T) {
	p := openPressure()
	if p == nil {
		t.Log("no CPU pressure file on this host: only the thread clocks are checked")
	}
	defer p.close()
	n := testing.AllocsPerRun(200, func() {
		p.some()
		p.times()
		threadClocks()
	})
	if n != 0 {
		t.Fatalf("reading the host's clocks allocates %.1f times", n)
	}
	var pc realPacer
	pc.start, pc.period, pc.jitter = time.Now(), time.Microsecond, NewHistogram()
	tick := int64(0)
	if n := testing.AllocsPerRun(200, func() { tick++; pc.wait(tick) }); n != 0 {
		t.Fatalf("the real-clock pacer allocates %.1f times per tick", n)
	}
}

func TestParseCPUTimes(t *testing.T) {
	tests := []struct {
		in   string
		want cpuTimes
		ok   bool
	}{
		// The layout of /proc/stat (proc(5)): user nice system idle iowait
		// irq softirq steal guest guest_nice.
		{"cpu  1320399 20406 249564 357636 5338 0 4722 3754 0 0\ncpu0 656854 9610 124089 185096 1897 0 1106 1882 0 0\n",
			cpuTimes{nonidle: 1320399 + 20406 + 249564 + 5338 + 0 + 4722 + 3754, all: 1320399 + 20406 + 249564 + 357636 + 5338 + 0 + 4722 + 3754}, true},
		{"cpu  1 2 3 4 5 6 7 8\n", cpuTimes{nonidle: 1 + 2 + 3 + 5 + 6 + 7 + 8, all: 36}, true},
		{"cpu  1 2 3 4\n", cpuTimes{}, false},
		{"cpu0 1 2 3 4 5 6 7 8\n", cpuTimes{}, false},
		{"cpu  1 2 x 4 5 6 7 8\n", cpuTimes{}, false},
		{"", cpuTimes{}, false},
	}
	for _, tc := range tests {
		got, ok := parseCPUTimes([]byte(tc.in))
		if got != tc.want || ok != tc.ok {
			t.Errorf("%q: %+v %v, want %+v %v", tc.in, got, ok, tc.want, tc.ok)
		}
	}
}

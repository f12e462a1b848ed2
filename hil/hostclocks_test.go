package hil

import (
	"testing"
	"time"

	"gaitrig/internal/hostload"
)

// Reading the pressure and the thread clocks happens inside a tick's wait;
// neither may allocate.
func TestHostClocksDoNotAllocate(t *testing.T) {
	p := hostload.Open()
	if p == nil {
		t.Log("no CPU pressure file on this host: only the thread clocks are checked")
	}
	defer p.Close()
	n := testing.AllocsPerRun(200, func() {
		p.Some()
		p.Times()
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

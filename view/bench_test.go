package view_test

import (
	"context"
	"io"
	"net/http"
	"runtime"
	"syscall"
	"testing"
	"time"

	"gaitrig/hil"
	"gaitrig/record"
	"gaitrig/rig"
	"gaitrig/scenarios"
	"gaitrig/view"
)

// BenchmarkRunWithView runs the demo scenario in free-running lockstep
// against the built-in firmware for 20 simulated seconds per op, without a
// record, with and without the live view (server, feed and one page
// reading the stream over loopback): the cost of watching to the loop.
// It reports how many times faster than real time the run goes, the CPU
// time of the whole process per tick (user and system, the server's and the
// page's reader's included; less sensitive than wall time to other
// programs on a shared machine, though not immune to them), and the
// allocations of the whole process (the server's included).
func BenchmarkRunWithView(b *testing.B) {
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		b.Fatal(err)
	}
	const simS = 20
	for _, withView := range []bool{false, true} {
		name := "no-view"
		if withView {
			name = "view"
		}
		b.Run(name, func(b *testing.B) {
			b.ReportAllocs()
			var sim, wall, cpu float64
			var ticks int64
			for b.Loop() {
				o := rig.Options{Link: "builtin", NoRecord: true, Duration: simS, MaxSteps: -1}
				var live *view.Live
				if withView {
					tap := hil.NewTap(0, false)
					live = view.NewLive(tap)
					o.Tap, o.Watch, o.OnStep = tap, live, live.Step
				}
				p, err := rig.Prepare(context.Background(), sc, o)
				if err != nil {
					b.Fatal(err)
				}
				var srv *view.Server
				var reading chan struct{}
				if withView {
					srv, err = view.New(view.Config{Setup: view.Setup{Mode: "live", Plant: record.PlantOf(p.Model.Params())}})
					if err != nil {
						b.Fatal(err)
					}
					live.Start(srv)
					reading = make(chan struct{})
					resp, err := http.Get(srv.URL() + "events")
					if err != nil {
						b.Fatal(err)
					}
					go func() {
						defer close(reading)
						io.Copy(io.Discard, resp.Body)
						resp.Body.Close()
					}()
				}
				start, cpu0 := time.Now(), cpuSeconds()
				r, err := p.Run(context.Background())
				wall += time.Since(start).Seconds()
				cpu += cpuSeconds() - cpu0
				ticks += r.Summary.Ticks
				if err != nil {
					b.Fatal(err)
				}
				sim += r.Summary.SimTimeS
				if withView {
					live.Finish(&r.Summary, "")
					srv.Close()
					<-reading
				}
				p.Close()
				runtime.GC()
			}
			b.ReportMetric(sim/wall, "x_realtime")
			b.ReportMetric(cpu*1e9/float64(ticks), "cpu-ns/tick")
		})
	}
}

// cpuSeconds is the user and system CPU time of this process so far.
func cpuSeconds() float64 {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return float64(ru.Utime.Nano()+ru.Stime.Nano()) / 1e9
}

// The live view's part of the tick path besides the tap: a step handed to
// Live.Step goes into a ring of atomics without allocating.
func TestLiveStepDoesNotAllocate(t *testing.T) {
	live := view.NewLive(hil.NewTap(0, false))
	si := hil.StepInfo{Index: 1, DurationS: 0.6, LengthM: 0.5, SpeedMPS: 0.8, PeakUtil: 0.3, MinNormal: 200, SimTimeS: 1, EndS: 0.9995}
	if n := testing.AllocsPerRun(1000, func() { si.Index++; live.Step(si) }); n != 0 {
		t.Errorf("Live.Step allocates %v times per step, want 0", n)
	}
}

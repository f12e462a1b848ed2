package view_test

import (
	"context"
	"io"
	"net/http"
	"runtime"
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
// It reports how many times faster than real time the run goes and the
// allocations of the whole process per tick (the server's included).
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
			var sim, wall float64
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
				start := time.Now()
				r, err := p.Run(context.Background())
				wall += time.Since(start).Seconds()
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
		})
	}
}

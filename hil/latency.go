package hil

import (
	"context"
	"fmt"
	"runtime"
	"time"

	"gaitrig/bridges"
	"gaitrig/plant"
)

// LatencyReport is what MeasureLatency saw.
type LatencyReport struct {
	Link    string  // what was measured, for the printout
	Ticks   int64   // ticks run
	TickHz  float64 // tick rate
	Latency Summary // command round trip: state sent → its command taken, µs
	Jitter  Summary // tick start lateness, µs
	Misses  uint64  // ticks whose work ended after the next tick was due
	// MissRate is Misses / Ticks.
	MissRate float64
	// FreshRate is the fraction of ticks that had a fresh command.
	FreshRate float64
	// Outcome and Reason are the run's.
	Outcome, Reason string
	// Realtime says whether SCHED_FIFO was granted.
	Realtime string
	// MallocsPerTick is the process's heap allocations per tick over the
	// run (firmware included when it runs in this process).
	MallocsPerTick float64
}

// String prints the report in a few plain lines.
func (r LatencyReport) String() string {
	return fmt.Sprintf("%s: %d ticks at %g Hz (%s)\n"+
		"  round trip   p50 %7.1f µs   p99 %7.1f µs   max %7.1f µs   (%d commands)\n"+
		"  tick jitter  p50 %7.1f µs   p99 %7.1f µs   max %7.1f µs\n"+
		"  deadline misses %d (%.3f %%), ticks with a fresh command %.1f %%, %.3f allocations per tick\n"+
		"  outcome %s%s",
		r.Link, r.Ticks, r.TickHz, r.Realtime,
		r.Latency.P50, r.Latency.P99, r.Latency.Max, r.Latency.Count,
		r.Jitter.P50, r.Jitter.P99, r.Jitter.Max,
		r.Misses, 100*r.MissRate, 100*r.FreshRate, r.MallocsPerTick, r.Outcome, reasonSuffix(r.Reason))
}

// MeasureLatency runs the demo walker (plant.DemoParams from its walking
// start) in wall-clock mode for ticks ticks at hz against the firmware on
// the other end of conn, and reports round-trip latency, tick jitter and
// deadline misses. The firmware must drive the demo walker's two hip
// joints; the reference firmware does. The watchdog is set to one second
// so a slow link is measured rather than tripped. link names the link in
// the printout.
func MeasureLatency(ctx context.Context, conn bridges.Conn, link string, ticks int, hz float64) (LatencyReport, error) {
	if ticks <= 0 {
		ticks = 10000
	}
	if hz <= 0 {
		hz = DefaultTickHz
	}
	cfg := Config{
		Clock:     Wallclock,
		TickHz:    hz,
		Physics:   plant.Options{IgnoreScuff: true},
		Duration:  float64(ticks) / hz,
		Watchdog:  time.Second,
		Sensors:   SensorModel{CountsPerRev: 4096, ContactThreshold: 5},
		Actuators: ActuatorModel{TorqueLimit: 60},
		Seed:      1,
	}
	m, err := plant.New(plant.DemoParams(), cfg.Physics)
	if err != nil {
		return LatencyReport{}, err
	}
	s, err := m.Stand(0, 0, [2]float64{0.25, -0.25}, -0.1, -0.9, 0.5, 0)
	if err != nil {
		return LatencyReport{}, err
	}
	var fresh int64
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	r, err := newRunner(cfg, m, s, conn, nil)
	if err != nil {
		return LatencyReport{}, err
	}
	r.onTick = func() {
		if r.fresh {
			fresh++
		}
	}
	res, err := r.run(ctx)
	runtime.ReadMemStats(&after)
	rep := LatencyReport{Link: link, Ticks: res.Summary.Ticks, TickHz: hz, Latency: res.Latency, Jitter: res.Jitter,
		Misses: res.DeadlineMisses, Outcome: string(res.Summary.Outcome), Reason: res.Summary.Reason, Realtime: res.Realtime}
	if rep.Ticks > 0 {
		rep.MissRate = float64(rep.Misses) / float64(rep.Ticks)
		rep.FreshRate = float64(fresh) / float64(rep.Ticks)
		rep.MallocsPerTick = float64(after.Mallocs-before.Mallocs) / float64(rep.Ticks)
	}
	return rep, err
}

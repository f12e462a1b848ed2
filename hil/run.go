package hil

// This file sets up a run and holds it together: the runner owns the
// parts below and the wiring between them; each part lives in its own
// file with what it owns.

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/internal/hostload"
	"gaitrig/plant"
	"gaitrig/record"
)

// Result is what a run ended with. The same figures are in the record's
// summary.json when a record was given.
type Result struct {
	// Summary is the run summary as written to summary.json.
	Summary record.Summary
	// Greeting is the firmware's greeting.
	Greeting protocol.Greeting
	// Final is the plant state at the end of the run.
	Final plant.State
	// Latency is the command round trip (state sent → its command received),
	// Jitter the tick start lateness (wall-clock mode only).
	Latency, Jitter Summary
	// DeadlineMisses counts wall-clock ticks whose work ended after the next
	// tick was due.
	DeadlineMisses uint64
	// Link counts what the loop saw on the link.
	Link LinkCounts
	// Realtime says whether the real-time scheduling class was granted
	// (wall-clock mode), in words.
	Realtime string
	// Transport is what the link itself counted (bytes, frames, frames it
	// dropped because the reader fell behind, reconnects), read once at the
	// end of the run. It tells apart losses the loop sees (Link) from
	// those only the transport saw.
	Transport bridges.Stats
}

// LinkCounts are the loop's own counters of the link.
type LinkCounts struct {
	StatesSent     uint64 // states sent, resends included (not those lost to a drop fault)
	Resends        uint64 // lockstep states sent again after Resend with no reply
	Commands       uint64 // commands taken (bad torques included; stale, dropped and corrupted ones not)
	StaleCommands  uint64 // commands whose sequence number was not the one awaited (duplicates, floods, late replies)
	BadFrames      uint64 // frames the link rejected (*bridges.FrameError) plus injected corruptions
	BadTorques     uint64 // commands rejected for a NaN, Inf or absurd torque
	DroppedStates  uint64 // states lost to an injected drop fault
	DroppedCommand uint64 // commands lost to an injected drop fault
	Corrupted      uint64 // commands corrupted by injection (included in BadFrames)
}

// Run connects to the firmware over conn, runs the plant model from initial
// under cfg and records every tick into rec. It owns rec: it closes it with
// the summary, whatever happens, so the run folder is complete. rec may be
// nil (benchmarks, analysis). conn stays open; the caller closes it.
//
// ctx cancellation (SIGINT in the command line) ends the run at the next
// tick with outcome aborted; a Stop is sent to the firmware in every case.
// Run returns an error only when the run could not be carried out as asked
// (bad configuration, no greeting, wrong actuator count, record failure);
// alarms and trips are results, not errors.
func Run(ctx context.Context, cfg Config, model *plant.Model, initial plant.State, conn bridges.Conn, rec *record.Writer) (Result, error) {
	if ctx == nil {
		ctx = context.Background()
	}
	r, err := newRunner(cfg, model, initial, conn, rec)
	if err != nil {
		if rec != nil {
			rec.Close(record.Summary{Outcome: record.Aborted, Reason: err.Error(), Alarms: map[string]int{}})
		}
		return Result{}, err
	}
	return r.run(ctx)
}

// runner is one run. It is the parts that each have one job, plus what
// they share; everything the tick loop touches is allocated in newRunner.
type runner struct {
	cfg   Config
	m     *plant.Model
	rec   *record.Writer // nil: no record
	dt    float64
	n     int      // joints
	names []string // joint names

	sess   session     // session.go: the firmware session over the fault link
	health linkHealth  // health.go: link counts, outages, watchdog, e-stop
	pt     plantTick   // tick.go: the plant tick and its telemetry row
	steps  stepTracker // steps.go: per-step metrics between heel strikes
	end    ending      // ending.go: outcome, reason and stop code, first wins
	times  timing      // pace.go: round trip, jitter, deadline misses (wall-clock)
	stalls hostStalls  // hoststall.go: the rig's own lateness
	// pressure is the host's CPU pressure (lockstep only; nil without
	// PSI), read only while a firmware's answer is late. Wall-clock does
	// not use it: on a shared host the pressure is high nearly all the
	// time, and a firmware that is gone would then never be caught.
	pressure *hostload.Pressure
	sens     *sensorBank   // sensors.go: what the board's sensors read
	act      *actuatorBank // actuators.go: commanded to applied torque
	al       *alarmer      // alarm.go: the alarm policy and the event log
	tm       treadmill     // treadmill.go: belt speed and position, harness

	// fresh says whether this tick took a command from the firmware: set
	// by the session, logged in the row, counted by MeasureLatency.
	fresh   bool
	onTick  func()    // called after each tick (MeasureLatency counts fresh commands)
	started time.Time // wall time the run started, for the summary
}

func newRunner(cfg Config, model *plant.Model, initial plant.State, conn bridges.Conn, rec *record.Writer) (*runner, error) {
	if model == nil {
		return nil, errors.New("hil: no plant model")
	}
	if conn == nil {
		return nil, errors.New("hil: no controller link")
	}
	c, err := cfg.withDefaults()
	if err != nil {
		return nil, err
	}
	r := &runner{cfg: c, m: model, rec: rec, dt: 1 / c.TickHz}
	r.names = model.JointNames()
	r.n = len(r.names)
	if r.n > protocol.MaxJoints {
		return nil, fmt.Errorf("hil: the walker has %d joints, a frame carries at most %d", r.n, protocol.MaxJoints)
	}
	if r.act, err = newActuatorBank(c.Actuators, r.names, r.dt); err != nil {
		return nil, err
	}
	freezes := slices.Clone(c.Freezes)
	for i := range freezes {
		f := &freezes[i]
		f.joint = slices.Index(r.names, f.Sensor)
		if f.joint < 0 && f.Sensor != "imu" && f.Sensor != "contacts" {
			return nil, fmt.Errorf("hil: freeze fault on sensor %q: want imu, contacts or a joint (%s)", f.Sensor, strings.Join(r.names, ", "))
		}
	}
	seed := uint64(c.Seed)
	// Separate streams, so adding a fault does not change the sensor noise.
	r.sens = newSensorBank(c.Sensors, freezes, rand.New(rand.NewPCG(seed, 0x5e5502)))
	// Link faults: lockstep draws for both directions from one stream, in
	// the order of the link traffic; wall-clock receives on a goroutine of
	// its own, which gets a stream of its own.
	faultRNG := rand.New(rand.NewPCG(seed, 0xfa017))
	recvRNG := faultRNG
	if c.Clock == Wallclock {
		recvRNG = rand.New(rand.NewPCG(seed, 0x2ec5))
	}
	r.sess.link = newFaultLink(r.sess.gated(conn), c.LinkFaults, faultRNG, recvRNG)
	r.health.notifier, _ = conn.(bridges.Notifier)
	r.al = newAlarmer(&r.cfg, rec)
	pt := &r.pt
	pt.s = initial
	pt.rate0 = make([]float64, r.n)
	pt.rate1 = make([]float64, r.n)
	pt.angleTmp = make([]float64, r.n)
	pt.latUS = nan
	// Only the wall clock times round trips and tick starts; lockstep keeps
	// empty histograms and spares the buckets (a few hundred KB per run,
	// which a suite of many runs would feel).
	r.times.latency, r.times.jitter = new(Histogram), new(Histogram)
	if c.Clock == Wallclock {
		r.times.latency, r.times.jitter = NewHistogram(), NewHistogram()
	}
	for _, p := range c.Pushes {
		ps := pushState{Push: p, start: p.At}
		if p.AtStep > 0 {
			ps.start = math.NaN()
		}
		pt.pushes = append(pt.pushes, ps)
	}
	pt.contact.reset()
	pt.knees.reset()
	if err := r.newTreadmill(); err != nil {
		return nil, err
	}
	// The foot switches of the first tick read the contact forces of the
	// initial state, as every later tick reads those of the last step.
	pt.res.Contacts = model.Contacts(&pt.s, &plant.Input{})
	r.steps.init(model, &pt.s)
	if rec != nil {
		pt.recStart = rec.Manifest().StartTime
	}
	return r, nil
}

// run is the whole run: handshake, ticks, stop, summary.
func (r *runner) run(ctx context.Context) (Result, error) {
	r.started = time.Now()
	// The wait for the greeting can take seconds (a board being plugged
	// in); the operator's interrupt ends it at once, with outcome aborted.
	r.sess.link.interrupt = ctx.Done()
	err := r.handshake()
	r.sess.link.interrupt = nil
	if err != nil && errors.Is(err, errInterrupted) {
		reason := "interrupted by the operator while waiting for the greeting (" + context.Cause(ctx).Error() + ")"
		if r.end.end(record.Aborted, reason, protocol.StopAborted) {
			r.al.info("aborted", 0, r.pt.s.T, reason, nil)
		}
	}
	if err == nil {
		if r.cfg.Clock == Wallclock {
			r.wallclock(ctx)
		} else {
			r.pressure = r.cfg.pressure
			if r.pressure == nil {
				r.pressure = hostload.Open()
			}
			r.lockstep(ctx)
			r.pressure.Close()
		}
	}
	if err != nil {
		r.failed(err)
	}
	r.sendStop()
	r.closeSession()
	if err == nil && r.end.outcome == record.Tripped && r.cfg.EStopCoast > 0 {
		r.coast()
	}
	return r.finish(err)
}

// coast runs the plant on after an e-stop under the e-stop policy, with no
// firmware, so the record shows the consequence. Alarms still count; the
// outcome stays tripped.
func (r *runner) coast() {
	pt := &r.pt
	n := int64(math.Round(r.cfg.EStopCoast * r.cfg.TickHz))
	r.al.info("e_stop_coast", pt.tick, pt.s.T, fmt.Sprintf("plant runs on %.3g s after the e-stop with policy %s", r.cfg.EStopCoast, r.cfg.EStop), nil)
	pt.commanded = [protocol.MaxJoints]float64{} // no firmware: nothing is commanded
	for i := int64(0); i < n && !pt.res.Stopped; i++ {
		r.fresh = false
		pt.latUS = nan // no command, so no round trip (wall-clock rows log latUS)
		if r.cfg.EStop == EStopDamp {
			r.m.JointState(&pt.s, pt.angleTmp, pt.rate0)
			for j := 0; j < r.n; j++ {
				tq := -r.cfg.EStopDamping * pt.rate0[j]
				if lim := r.act.limit[j]; lim > 0 {
					tq = math.Max(-lim, math.Min(lim, tq))
				}
				r.act.target[j] = tq
			}
		}
		r.sense() // what the sensors read, for the log; nothing is sent
		r.advance(time.Now())
	}
}

func (r *runner) logf(format string, a ...any) {
	if r.cfg.Log != nil {
		r.cfg.Log(fmt.Sprintf(format, a...))
	}
}

var nan = math.NaN()

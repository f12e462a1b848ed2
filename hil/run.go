package hil

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
}

// LinkCounts are the loop's own counters of the link.
type LinkCounts struct {
	StatesSent     uint64 // states sent, resends included
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

// runner holds one run's state. Everything the tick loop touches is
// allocated in newRunner.
type runner struct {
	cfg   Config
	m     *plant.Model
	conn  bridges.Conn
	rec   *record.Writer
	dt    float64
	n     int // joints
	names []string

	s   plant.State
	in  plant.Input
	res plant.TickResult

	sens *sensorBank
	act  *actuatorBank
	al   *alarmer
	frng *rand.Rand // fault injection, lockstep (loop goroutine)

	tick      int64
	seq       uint32
	tr        truth
	out       protocol.Message    // state sent
	msg       protocol.Message    // received
	fe        *bridges.FrameError // target of errors.As, kept here so it is not allocated per Recv
	commanded [protocol.MaxJoints]float64
	row       record.Tick
	fresh     bool
	latUS     float64

	rate0, rate1, angleTmp []float64

	steps    stepTracker
	pushes   []pushState
	pending  latencyQueue
	counts   LinkCounts
	latency  *Histogram
	jitter   *Histogram
	misses   uint64
	lastFW   uint16 // last firmware status, to raise firmware_fault on the rising edge
	satNow   bool   // saturated last command, to count episodes
	started  time.Time
	recStart time.Time // the record's start time, origin of Tick.WallS
	realtime string

	contact contactExtremes // of the stance foot over the whole run

	onTick   func() // called after each tick (MeasureLatency counts fresh commands)
	linkDown bool   // an outage was raised and no valid command has come since

	outcome  record.Outcome
	reason   string
	stopCode uint8
	greeting protocol.Greeting
	config   protocol.Message // the configuration sent, kept to send again
}

type pushState struct {
	Push
	start float64 // resolved start time, NaN until known
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
	r := &runner{cfg: c, m: model, conn: conn, rec: rec, dt: 1 / c.TickHz, s: initial}
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
	r.frng = rand.New(rand.NewPCG(seed, 0xfa017))
	r.al = newAlarmer(&r.cfg, rec)
	r.rate0 = make([]float64, r.n)
	r.rate1 = make([]float64, r.n)
	r.angleTmp = make([]float64, r.n)
	r.latency, r.jitter = new(Histogram), new(Histogram)
	for _, p := range c.Pushes {
		ps := pushState{Push: p, start: p.At}
		if p.AtStep > 0 {
			ps.start = math.NaN()
		}
		r.pushes = append(r.pushes, ps)
	}
	r.contact.reset()
	// The foot switches of the first tick read the contact forces of the
	// initial state, as every later tick reads those of the last step.
	r.res.Contacts = model.Contacts(&r.s, &plant.Input{})
	r.steps.init(model, &r.s)
	if rec != nil {
		r.recStart = rec.Manifest().StartTime
	}
	return r, nil
}

// run is the whole run: handshake, ticks, stop, summary.
func (r *runner) run(ctx context.Context) (Result, error) {
	r.started = time.Now()
	err := r.handshake()
	if err == nil {
		if r.cfg.Clock == Wallclock {
			err = r.wallclock(ctx)
		} else {
			err = r.lockstep(ctx)
		}
	}
	if err != nil && r.outcome == "" {
		r.outcome, r.reason = record.Aborted, err.Error()
		if r.stopCode == protocol.StopEnd {
			r.stopCode = protocol.StopAborted
		}
	}
	r.sendStop()
	if err == nil && r.outcome == record.Tripped && r.cfg.EStopCoast > 0 {
		r.coast()
	}
	return r.finish(err)
}

// coast runs the plant on after an e-stop under the e-stop policy, with no
// firmware, so the record shows the consequence. Alarms still count; the
// outcome stays tripped.
func (r *runner) coast() {
	n := int64(math.Round(r.cfg.EStopCoast * r.cfg.TickHz))
	r.al.info("e_stop_coast", r.tick, r.s.T, fmt.Sprintf("plant runs on %.3g s after the e-stop with policy %s", r.cfg.EStopCoast, r.cfg.EStop), nil)
	r.commanded = [protocol.MaxJoints]float64{} // no firmware: nothing is commanded
	for i := int64(0); i < n && !r.res.Stopped; i++ {
		r.fresh = false
		r.latUS = nan // no command, so no round trip (wall-clock rows log latUS)
		if r.cfg.EStop == EStopDamp {
			r.m.JointState(&r.s, r.angleTmp, r.rate0)
			for j := 0; j < r.n; j++ {
				tq := -r.cfg.EStopDamping * r.rate0[j]
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

// done reports whether the run has reached its end or an outcome.
func (r *runner) done() bool {
	if r.outcome != "" {
		return true
	}
	if r.cfg.MaxSteps > 0 && r.steps.count >= r.cfg.MaxSteps {
		return true
	}
	// Compare tick counts, not accumulated time, so the end tick does not
	// depend on rounding.
	if r.cfg.Duration > 0 && float64(r.tick) >= math.Round(r.cfg.Duration*r.cfg.TickHz) {
		return true
	}
	return false
}

// aborted checks ctx without blocking or allocating.
func (r *runner) aborted(ctx context.Context) bool {
	select {
	case <-ctx.Done():
		r.outcome, r.reason, r.stopCode = record.Aborted, "interrupted by the operator ("+context.Cause(ctx).Error()+")", protocol.StopAborted
		r.al.info("aborted", r.tick, r.s.T, r.reason, nil)
		return true
	default:
		return false
	}
}

// finish evaluates the criteria, writes the summary and closes the record.
func (r *runner) finish(runErr error) (Result, error) {
	res := Result{Greeting: r.greeting, Final: r.s, Link: r.counts, Realtime: r.realtime,
		Latency: r.latency.Summarize(), Jitter: r.jitter.Summarize(), DeadlineMisses: r.misses}
	sum := record.Summary{
		Outcome:                 r.outcome,
		Reason:                  r.reason,
		Steps:                   r.steps.count,
		Ticks:                   r.tick,
		SimTimeS:                r.s.T,
		WallTimeS:               time.Since(r.started).Seconds(),
		Alarms:                  r.al.counts,
		PeakFrictionUtilization: r.contact.peakUtil,
		MinNormalForceN:         r.contact.minNormal,
		MeanSpeedMPS:            r.steps.meanSpeed(),
		DeadlineMisses:          int(r.misses),
	}
	if r.cfg.Clock == Wallclock {
		l, j := res.Latency, res.Jitter
		sum.LatencyUS = &record.Latency{P50: l.P50, P99: l.P99, Max: l.Max}
		sum.JitterUS = &record.Latency{P50: j.P50, P99: j.P99, Max: j.Max}
	}
	sum.Criteria = evaluate(&r.cfg.Criteria, &sum)
	if sum.Outcome == "" {
		sum.Outcome = record.Pass
		for _, c := range sum.Criteria {
			if !c.Pass {
				sum.Outcome = record.Fail
				if sum.Reason == "" {
					sum.Reason = fmt.Sprintf("criterion %s not met: %g against the limit %g", c.Name, c.Value, c.Limit)
				}
			}
		}
	}
	r.al.info("run_end", r.tick, r.s.T, "run ended: "+string(sum.Outcome)+reasonSuffix(sum.Reason),
		map[string]float64{"steps": float64(sum.Steps), "ticks": float64(sum.Ticks)})
	res.Summary = sum
	r.al.close()
	var errs []error
	if runErr != nil {
		errs = append(errs, runErr)
	}
	if r.al.logErr != nil {
		errs = append(errs, fmt.Errorf("hil: event log: %w", r.al.logErr))
	}
	if r.rec != nil {
		if err := r.rec.Close(sum); err != nil {
			errs = append(errs, err)
		}
	}
	return res, errors.Join(errs...)
}

func reasonSuffix(s string) string {
	if s == "" {
		return ""
	}
	return " (" + s + ")"
}

// evaluate checks the criteria against the summary.
func evaluate(c *Criteria, s *record.Summary) []record.Criterion {
	out := []record.Criterion{}
	if c.MinSteps > 0 {
		out = append(out, record.Criterion{Name: "min_steps", Value: float64(s.Steps), Limit: float64(c.MinSteps), Pass: s.Steps >= c.MinSteps})
	}
	if c.NoTrip == nil || *c.NoTrip {
		v := 0.0
		if s.Outcome == record.Tripped {
			v = 1
		}
		out = append(out, record.Criterion{Name: "no_trip", Value: v, Limit: 0, Pass: v == 0})
	}
	if c.MinSpeedMPS != nil {
		out = append(out, record.Criterion{Name: "min_speed_mps", Value: s.MeanSpeedMPS, Limit: *c.MinSpeedMPS, Pass: s.MeanSpeedMPS >= *c.MinSpeedMPS})
	}
	if c.MaxSpeedMPS != nil {
		out = append(out, record.Criterion{Name: "max_speed_mps", Value: s.MeanSpeedMPS, Limit: *c.MaxSpeedMPS, Pass: s.MeanSpeedMPS <= *c.MaxSpeedMPS})
	}
	if c.MaxFrictionUtilization != nil {
		out = append(out, record.Criterion{Name: "max_friction_utilization", Value: s.PeakFrictionUtilization, Limit: *c.MaxFrictionUtilization,
			Pass: s.PeakFrictionUtilization <= *c.MaxFrictionUtilization})
	}
	if c.MinNormalForceN != nil {
		out = append(out, record.Criterion{Name: "min_normal_force_n", Value: s.MinNormalForceN, Limit: *c.MinNormalForceN, Pass: s.MinNormalForceN >= *c.MinNormalForceN})
	}
	if c.MaxLatencyP99US != nil && s.LatencyUS != nil {
		out = append(out, record.Criterion{Name: "max_latency_p99_us", Value: s.LatencyUS.P99, Limit: *c.MaxLatencyP99US, Pass: s.LatencyUS.P99 <= *c.MaxLatencyP99US})
	}
	return out
}

var nan = math.NaN()

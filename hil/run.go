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
	"unicode/utf8"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/plant"
	"gaitrig/record"
	"gaitrig/scenarios"
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
	cmd       protocol.Command    // last valid command taken
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

// handshake waits for the greeting, checks it and sends the configuration.
func (r *runner) handshake() error {
	deadline := time.Now().Add(r.cfg.HandshakeTimeout)
	for {
		err := r.conn.Recv(deadline, &r.msg)
		switch {
		case errors.Is(err, bridges.ErrTimeout):
			return fmt.Errorf("hil: no greeting from the firmware within %v; is it connected, powered and speaking protocol v%d?", r.cfg.HandshakeTimeout, protocol.Version)
		case errors.Is(err, bridges.ErrDisconnected):
			r.disconnected(err)
			continue
		case errors.Is(err, bridges.ErrClosed):
			r.linkLost(0, "the link closed before the firmware greeted")
			return errors.New("hil: the link closed before the firmware greeted")
		case errors.As(err, &r.fe):
			r.badFrame(r.fe.Reason)
			continue
		case err != nil:
			return fmt.Errorf("hil: waiting for the greeting: %w", err)
		}
		if r.msg.Type == protocol.TypeGreeting {
			break
		}
		// Anything else before the greeting (a stray command from a previous
		// run, a heartbeat) is not an error: the firmware may still be
		// finishing its last session.
	}
	g := r.msg.Greeting
	r.greeting = g
	if r.rec != nil {
		if err := r.rec.SetGreeting(record.Greeting{Name: g.Name, Build: g.Build, Protocol: int(g.Version), Actuators: int(g.Actuators)}); err != nil {
			return err
		}
	}
	if g.Version != protocol.Version {
		msg := fmt.Sprintf("firmware %q speaks protocol version %d, this rig speaks version %d", g.Name, g.Version, protocol.Version)
		r.al.raise(scenarios.AlarmVersionMismatch, 0, 0, -1, -1, func() (string, map[string]float64) {
			return msg, map[string]float64{"firmware_version": float64(g.Version), "rig_version": float64(protocol.Version)}
		})
		r.stopCode = protocol.StopBadVersion
		r.outcome, r.reason = record.Tripped, msg
		return nil
	}
	if int(g.Actuators) != r.n {
		r.stopCode = protocol.StopEStop
		return fmt.Errorf("hil: firmware %q drives %d actuators, this walker has %d (%s)", g.Name, g.Actuators, r.n, strings.Join(r.names, ", "))
	}
	r.logf("firmware %q build %q greeted with protocol v%d, %d actuators", g.Name, g.Build, g.Version, g.Actuators)
	c := &r.config
	c.Type = protocol.TypeConfig
	c.Config.TickHz = uint16(math.Min(math.Round(r.cfg.TickHz), math.MaxUint16))
	c.Config.Lockstep = r.cfg.Clock == Lockstep
	c.Config.Joints = uint8(r.n)
	for i, name := range r.names {
		c.Config.JointNames[i] = name
		c.Config.TorqueLimit[i] = float32(r.act.limit[i])
	}
	if err := r.conn.Send(c); err != nil {
		return fmt.Errorf("hil: sending the configuration: %w", err)
	}
	return nil
}

// greetedAgain handles a greeting after the handshake. Before the first
// command it means the configuration was lost on the way: send it again.
// After commands have come it means the firmware restarted mid-run: an
// alarm, and the configuration again so it can go on.
func (r *runner) greetedAgain() {
	if r.counts.Commands > 0 {
		if r.al.raise(scenarios.AlarmFirmwareFault, r.tick, r.s.T, -1, -1, func() (string, map[string]float64) {
			return "the firmware greeted again in the middle of the run: it restarted", map[string]float64{"commands_before": float64(r.counts.Commands)}
		}) {
			r.trip(protocol.StopEStop)
			return
		}
	}
	r.conn.Send(&r.config)
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

// drainLinkEvents turns the link's health reports into alarms.
func (r *runner) drainLinkEvents() {
	n, ok := r.conn.(bridges.Notifier)
	if !ok {
		return
	}
	for {
		select {
		case ev := <-n.Events():
			switch ev.Kind {
			case "disconnected":
				cause := "unknown cause"
				if ev.Err != nil {
					cause = ev.Err.Error()
				}
				r.linkLost(0, "link to the firmware lost: "+cause)
			case "reconnected":
				gap := ev.Gap
				if r.al.raise(scenarios.AlarmLinkRestored, r.tick, r.s.T, -1, -1, func() (string, map[string]float64) {
					return fmt.Sprintf("link to the firmware restored after %v", gap), map[string]float64{"gap_ms": float64(gap) / 1e6}
				}) {
					r.trip(protocol.StopEStop)
				}
				if gap > r.cfg.Watchdog {
					r.watchdog(gap)
				}
			}
		default:
			return
		}
	}
}

// disconnected handles a Recv that reports the peer gone on a link that
// reconnects by itself. A link that reports link events raises its own
// link_lost through them; for one that does not, the loop raises it here.
func (r *runner) disconnected(err error) {
	if _, ok := r.conn.(bridges.Notifier); ok {
		r.drainLinkEvents()
		return
	}
	if r.linkDown {
		return // raised once per outage; a valid command ends it
	}
	r.linkDown = true
	r.linkLost(0, "link to the firmware lost: "+err.Error())
}

func (r *runner) linkLost(gap time.Duration, msg string) {
	if r.al.raise(scenarios.AlarmLinkLost, r.tick, r.s.T, -1, -1, func() (string, map[string]float64) {
		return msg, nil
	}) {
		r.trip(protocol.StopEStop)
	}
}

func (r *runner) badFrame(reason string) {
	r.counts.BadFrames++
	if r.al.raise(scenarios.AlarmBadFrame, r.tick, r.s.T, -1, -1, func() (string, map[string]float64) {
		return "rejected a frame from the firmware: " + reason, map[string]float64{"bad_frames_so_far": float64(r.counts.BadFrames)}
	}) {
		r.trip(protocol.StopEStop)
	}
}

func (r *runner) watchdog(silent time.Duration) {
	ms := float64(silent) / 1e6
	if r.al.raise(scenarios.AlarmWatchdog, r.tick, r.s.T, -1, -1, func() (string, map[string]float64) {
		return fmt.Sprintf("no valid command from the firmware for %.1f ms (watchdog %v): e-stop", ms, r.cfg.Watchdog),
			map[string]float64{"silent_ms": ms, "watchdog_ms": float64(r.cfg.Watchdog) / 1e6}
	}) {
		r.trip(protocol.StopWatchdog)
	}
}

// trip e-stops: torques to zero, outcome tripped. The Stop message goes out
// when the loop ends.
func (r *runner) trip(code uint8) {
	if r.outcome != "" {
		return
	}
	r.act.zero()
	r.outcome, r.stopCode = record.Tripped, code
	if r.al.trip != nil {
		r.reason = r.al.trip.kind + ": " + r.al.trip.message
	}
	r.al.info("e_stop", r.tick, r.s.T, "e-stop: torques set to zero, firmware told to stop ("+r.reason+")", nil)
}

// takeCommand applies one valid command from the firmware: torque checks,
// saturation and status alarms.
func (r *runner) takeCommand(c *protocol.Command) {
	r.counts.Commands++
	r.fresh = true
	for i := 0; i < protocol.MaxJoints; i++ {
		r.commanded[i] = float64(c.Torque[i])
	}
	chk := r.act.command(c)
	switch {
	case chk.wrongJoints:
		r.counts.BadTorques++
		n := c.Joints
		if r.al.raise(scenarios.AlarmBadTorque, r.tick, r.s.T, -1, -1, func() (string, map[string]float64) {
			return fmt.Sprintf("command carries %d torques, this walker has %d joints: rejected, zero torque applied", n, r.n),
				map[string]float64{"torques": float64(n), "joints": float64(r.n)}
		}) {
			r.trip(protocol.StopEStop)
		}
		return
	case chk.bad:
		r.counts.BadTorques++
		j, v := chk.badJoint, chk.badValue
		if r.al.raise(scenarios.AlarmBadTorque, r.tick, r.s.T, -1, -1, func() (string, map[string]float64) {
			return fmt.Sprintf("commanded torque %s = %g N·m is not a usable torque (NaN, infinite or beyond %g N·m): command rejected, zero torque applied", r.names[j], v, r.act.model.Sanity),
				map[string]float64{"joint": float64(j), "torque_nm": v, "sanity_nm": r.act.model.Sanity}
		}) {
			r.trip(protocol.StopEStop)
		}
		return
	}
	if chk.saturated && !r.satNow {
		j, v := chk.satJoint, chk.satValue
		if r.al.raise(scenarios.AlarmTorqueSaturation, r.tick, r.s.T, -1, -1, func() (string, map[string]float64) {
			return fmt.Sprintf("commanded torque %s = %.4g N·m beyond the limit %.4g N·m: clipped", r.names[j], v, r.act.limit[j]),
				map[string]float64{"joint": float64(j), "torque_nm": v, "limit_nm": r.act.limit[j]}
		}) {
			r.trip(protocol.StopEStop)
		}
	}
	r.satNow = chk.saturated
	if c.Status&protocol.StatusFault != 0 && r.lastFW&protocol.StatusFault == 0 {
		st := c.Status
		if r.al.raise(scenarios.AlarmFirmwareFault, r.tick, r.s.T, -1, -1, func() (string, map[string]float64) {
			return "the firmware reports an internal fault (status bit 0 set)", map[string]float64{"status": float64(st)}
		}) {
			r.trip(protocol.StopEStop)
		}
	}
	r.lastFW = c.Status
}

// firmwareStop handles a Stop from the firmware: the run cannot go on.
func (r *runner) firmwareStop(st protocol.Stop) {
	text := st.Text
	// The run ends here, so this alarm is logged even inside the rate limit.
	r.al.counts[scenarios.AlarmFirmwareFault]++
	if r.al.emit(alarm{kind: scenarios.AlarmFirmwareFault, tick: r.tick, t: r.s.T, foot: -1, segment: -1,
		message: fmt.Sprintf("the firmware stopped the run (reason %d: %q)", st.Reason, text), values: map[string]float64{"reason": float64(st.Reason)}}) {
		r.trip(protocol.StopFirmware)
		return
	}
	if r.outcome == "" {
		r.outcome, r.reason, r.stopCode = record.Fail, fmt.Sprintf("the firmware stopped the run (reason %d: %q)", st.Reason, text), protocol.StopFirmware
	}
}

// sense fills r.out with the state the firmware will see this tick.
func (r *runner) sense() {
	r.m.JointState(&r.s, r.tr.angle[:r.n], r.tr.rate[:r.n])
	r.tr.joints = r.n
	r.tr.pitch, r.tr.pitchV = r.m.IMU(&r.s)
	r.tr.normal = [2]float64{r.res.Contacts[0].Normal, r.res.Contacts[1].Normal}
	r.tr.timeUS = uint64(math.Round(r.s.T * 1e6))
	r.out.Type = protocol.TypeState
	r.seq++
	r.out.Seq = r.seq
	r.sens.read(r.s.T, &r.tr, &r.out.State)
}

// pushForce is the hip force over the tick that starts at t.
func (r *runner) pushForce(t float64) [2]float64 {
	var f [2]float64
	for i := range r.pushes {
		p := &r.pushes[i]
		if math.IsNaN(p.start) || t+r.dt <= p.start {
			continue
		}
		if p.Impulse != [2]float64{} && t <= p.start {
			// The tick that holds the push start carries the whole impulse.
			f[0] += p.Impulse[0] / r.dt
			f[1] += p.Impulse[1] / r.dt
		}
		if p.Force != [2]float64{} && t >= p.start-r.dt/2 && t < p.start+p.Duration-r.dt/2 {
			f[0] += p.Force[0]
			f[1] += p.Force[1]
		}
	}
	return f
}

// advance steps the plant one tick with the applied torque, then records
// the tick, raises plant alarms and closes steps.
func (r *runner) advance(wall time.Time) {
	applied := r.act.step()
	for i := 0; i < r.n; i++ {
		r.in.Torque[i] = applied[i]
	}
	t0 := r.s.T
	r.in.HipForce = r.pushForce(t0)
	r.m.JointState(&r.s, r.angleTmp, r.rate0)
	r.m.Step(&r.s, &r.in, r.dt, &r.res)
	r.m.JointState(&r.s, r.angleTmp, r.rate1)
	// Actuator work by the midpoint rule on the joint rate over the tick.
	var pos, neg float64
	for i := 0; i < r.n; i++ {
		p := applied[i] * 0.5 * (r.rate0[i] + r.rate1[i]) * r.dt
		if p > 0 {
			pos += p
		} else {
			neg += p
		}
	}
	st := r.s.Stance
	fc := &r.res.Contacts[st]
	r.contact.add(fc)
	r.steps.tick(pos, neg, fc)
	r.record(wall)
	for i := 0; i < r.res.NumEvents; i++ {
		r.plantEvent(&r.res.Events[i])
	}
	if r.res.Dropped > 0 {
		r.al.info("events_dropped", r.tick, r.s.T, fmt.Sprintf("%d plant events in one tick did not fit the tick record", r.res.Dropped), nil)
	}
	if r.res.Stopped && r.outcome == "" {
		r.outcome, r.reason, r.stopCode = record.Fail, "the plant stopped at an event it was told not to continue past", protocol.StopEnd
		for i := r.res.NumEvents - 1; i >= 0; i-- {
			if k, ok := alarmKind(r.res.Events[i].Kind); ok {
				r.reason = "the plant stopped at " + k + " (physics set to stop there)"
				break
			}
		}
	}
	if r.onTick != nil {
		r.onTick()
	}
	r.tick++
}

// record writes the telemetry row of the tick just stepped. The row holds
// the state at the end of the tick, the readings the firmware was sent at
// its start and the torques held over it.
func (r *runner) record(wall time.Time) {
	if r.rec == nil {
		return
	}
	row := &r.row
	row.Index = r.tick
	row.T = r.s.T
	if r.cfg.Clock == Wallclock {
		row.WallS = wall.Sub(r.recStart).Seconds()
		row.LatencyUS = r.latUS
	} else {
		// Lockstep logs must be identical run to run: no wall time, no latency.
		row.WallS = 0
		row.LatencyUS = math.NaN()
	}
	nq := r.m.NumDOF()
	copy(row.Q[:nq], r.s.Q[:nq])
	copy(row.V[:nq], r.s.V[:nq])
	for i := 0; i < r.n; i++ {
		row.Angle[i] = float64(r.out.State.Angle[i])
		row.Rate[i] = float64(r.out.State.Rate[i])
		row.Commanded[i] = r.commanded[i]
		row.Applied[i] = r.in.Torque[i]
	}
	row.Push = r.in.HipForce
	for i := 0; i < 2; i++ {
		c := &r.res.Contacts[i]
		row.Feet[i] = record.Foot{Mode: int(c.Mode), NormalN: c.Normal, TangentialN: c.Tangential,
			Utilization: c.Utilization, CoP: c.CoP, ContactX: c.Point[0]}
	}
	row.Kinetic, row.Potential = r.m.Energy(&r.s)
	row.Fresh = r.fresh
	row.Stance = r.s.Stance
	if err := r.rec.Tick(row); err != nil && r.outcome == "" {
		r.outcome, r.reason, r.stopCode = record.Aborted, "telemetry could not be written: "+err.Error(), protocol.StopAborted
	}
}

// alarmKind maps a plant event to its alarm kind; heel strikes, toe-offs and
// re-sticking are normal walking, not alarms.
func alarmKind(k plant.EventKind) (string, bool) {
	switch k {
	case plant.FrictionLimit:
		return scenarios.AlarmFrictionLimit, true
	case plant.LiftOff:
		return scenarios.AlarmLiftOff, true
	case plant.ImpactSlip:
		return scenarios.AlarmImpactSlip, true
	case plant.Scuff, plant.Touchdown:
		return scenarios.AlarmFootScuff, true
	case plant.Fall:
		return scenarios.AlarmFall, true
	case plant.NonFinite, plant.BadInput:
		return scenarios.AlarmNonFinite, true
	}
	return "", false
}

// plantEvent turns one plant event into a step boundary or an alarm.
func (r *runner) plantEvent(e *plant.Event) {
	if e.Kind == plant.HeelStrike {
		r.heelStrike(e)
		return
	}
	kind, ok := alarmKind(e.Kind)
	if !ok || (e.Kind == plant.Scuff && r.m.Options().IgnoreScuff) {
		// The plant reports an ignored scuff for the record; the scenario
		// chose to let the swing foot pass, so it is not an alarm.
		return
	}
	ev := *e
	if r.al.raise(kind, r.tick, e.T, e.Foot, e.Segment, func() (string, map[string]float64) {
		return plantMessage(&ev), map[string]float64{"value": ev.Value, "limit": ev.Limit}
	}) {
		r.trip(protocol.StopEStop)
	}
}

func footName(i int) string {
	switch i {
	case 0:
		return "left"
	case 1:
		return "right"
	}
	return "no"
}

// plantMessage says in a sentence what a plant event means.
func plantMessage(e *plant.Event) string {
	f := footName(e.Foot)
	switch e.Kind {
	case plant.FrictionLimit:
		return fmt.Sprintf("%s foot demands %.3g× the static friction limit μ_s·N (μ_s = %.3g): it would slip", f, e.Value, e.Limit)
	case plant.LiftOff:
		return fmt.Sprintf("%s foot would need the ground to pull (normal force %.4g N): it lifts off", f, e.Value)
	case plant.ImpactSlip:
		return fmt.Sprintf("%s foot heel-strike impulse needs friction ratio %.3g, beyond μ_s = %.3g: the impact slips", f, e.Value, e.Limit)
	case plant.Scuff:
		return fmt.Sprintf("%s foot scuffed the ground mid-swing (stride %.3g m, less than %.3g m)", f, e.Value, e.Limit)
	case plant.Touchdown:
		return fmt.Sprintf("%s foot touched down outside a heel strike", f)
	case plant.Fall:
		if e.Foot < 0 {
			return fmt.Sprintf("the walker fell: torso angle %.3g rad beyond %.3g rad", e.Value, e.Limit)
		}
		return fmt.Sprintf("the walker fell: hip %.3g m above the ground, below %.3g m", e.Value, e.Limit)
	case plant.NonFinite:
		return "the plant state became NaN or infinite; restored to the last finite state"
	case plant.BadInput:
		return fmt.Sprintf("the plant refused an unusable input (%g)", e.Value)
	}
	return e.Kind.String()
}

// heelStrike closes a step.
func (r *runner) heelStrike(e *plant.Event) {
	st := r.steps.strike(r.m, &r.s, e, &r.res)
	if r.rec != nil {
		if err := r.rec.Step(st); err != nil && r.outcome == "" {
			r.outcome, r.reason, r.stopCode = record.Aborted, "steps table could not be written: "+err.Error(), protocol.StopAborted
		}
	}
	for i := range r.pushes {
		if p := &r.pushes[i]; p.AtStep == st.Index {
			p.start = r.s.T
		}
	}
	if r.cfg.OnStep != nil {
		r.cfg.OnStep(StepInfo{Index: st.Index, DurationS: st.DurationS, LengthM: st.LengthM, SpeedMPS: st.SpeedMPS,
			PeakUtil: st.PeakUtilization, MinNormal: st.MinNormalN, SimTimeS: r.s.T})
	}
}

// latencyQueue holds commands delayed by a latency fault in lockstep, as
// (release tick, command) in arrival order. Fixed size: a delay longer than
// its capacity in ticks is refused at configuration time.
type latencyQueue struct {
	items [latencyQueueCap]struct {
		release int64
		cmd     protocol.Command
	}
	head, n int
}

const latencyQueueCap = 1024

func (q *latencyQueue) push(release int64, c *protocol.Command) bool {
	if q.n == latencyQueueCap {
		return false
	}
	it := &q.items[(q.head+q.n)%latencyQueueCap]
	it.release, it.cmd = release, *c
	q.n++
	return true
}

// popDue removes every command due by tick and returns the newest of them.
func (q *latencyQueue) popDue(tick int64, out *protocol.Command) bool {
	got := false
	for q.n > 0 {
		it := &q.items[q.head]
		if it.release > tick {
			break
		}
		*out = it.cmd
		got = true
		q.head = (q.head + 1) % latencyQueueCap
		q.n--
	}
	return got
}

// latencyTicks draws the added latency for one command in whole ticks.
func (r *runner) latencyDelay(t float64, rng *rand.Rand) time.Duration {
	var d time.Duration
	for i := range r.cfg.LinkFaults {
		f := &r.cfg.LinkFaults[i]
		if f.Kind != FaultLatency || !f.active(t) {
			continue
		}
		d += f.Fixed
		if f.Jitter > 0 {
			d += time.Duration(rng.Float64() * float64(f.Jitter))
		}
	}
	return d
}

// chance reports whether an active fault of the kind fires for one frame.
func (r *runner) chance(kind LinkFaultKind, t float64, rng *rand.Rand) bool {
	for i := range r.cfg.LinkFaults {
		f := &r.cfg.LinkFaults[i]
		if f.Kind == kind && f.active(t) && rng.Float64() < f.Rate {
			return true
		}
	}
	return false
}

// lockstep runs ticks in virtual time: each tick waits for the reply to its
// state.
func (r *runner) lockstep(ctx context.Context) error {
	lastValid := time.Now()
	for !r.done() {
		if r.aborted(ctx) {
			break
		}
		r.drainLinkEvents()
		if r.outcome != "" {
			break
		}
		r.sense()
		if !r.exchange(ctx, &lastValid) {
			break
		}
		r.fresh = false
		var c protocol.Command
		if r.pending.popDue(r.tick, &c) {
			r.takeCommand(&c)
		}
		// A command that trips still gets its tick, with the zero torque of
		// the e-stop, so the log shows what was sent and what was applied.
		r.advance(time.Time{})
	}
	return nil
}

// exchange sends the tick's state and waits for the command that echoes its
// sequence number, resending after cfg.Resend and tripping the watchdog
// after cfg.Watchdog. It returns false when the run must end.
func (r *runner) exchange(ctx context.Context, lastValid *time.Time) bool {
	r.sendState()
	resendAt := time.Now().Add(r.cfg.Resend)
	for r.outcome == "" {
		if r.aborted(ctx) {
			return false
		}
		now := time.Now()
		wd := lastValid.Add(r.cfg.Watchdog)
		// Past the watchdog, look once more without waiting: after a stall
		// of the rig itself the answer may already be in the buffer, and
		// that is not the firmware's fault.
		final := !now.Before(wd)
		deadline := resendAt
		if wd.Before(deadline) {
			deadline = wd
		}
		err := r.conn.Recv(deadline, &r.msg)
		if err == nil && r.validReply(lastValid) {
			return true
		}
		if errors.Is(err, bridges.ErrTimeout) && deadline.After(now) {
			// A wait that ended far later than its deadline means the rig
			// process itself was not running (an overloaded host). A
			// lockstep run does not blame the firmware for that: the
			// watchdog counts only the time the rig was listening.
			if late := time.Since(deadline); late > stallSlack {
				*lastValid = lastValid.Add(late)
				continue // and look again: the answer may have come meanwhile
			}
		}
		if final || (errors.Is(err, bridges.ErrTimeout) && !time.Now().Before(wd)) {
			r.watchdog(time.Since(*lastValid))
			return false
		}
		switch {
		case err == nil:
			switch r.msg.Type {
			case protocol.TypeStop:
				r.firmwareStop(r.msg.Stop)
				return false
			case protocol.TypeGreeting:
				r.greetedAgain()
			}
			// A stale, dropped or corrupted command, a heartbeat, a repeated
			// greeting: keep waiting.
		case errors.Is(err, bridges.ErrTimeout):
			if !time.Now().Before(resendAt) {
				if r.rec != nil {
					r.rec.Flush() // rows must not sit in the buffer while the rig waits
				}
				r.counts.Resends++
				r.sendState()
				resendAt = time.Now().Add(r.cfg.Resend)
			}
			r.drainLinkEvents()
		case errors.Is(err, bridges.ErrDisconnected):
			// The link lost its peer and is trying to get it back: the link
			// events say so, and the watchdog decides whether to wait.
			r.disconnected(err)
		case errors.Is(err, bridges.ErrClosed):
			r.linkLost(0, "link to the firmware closed")
			if r.outcome == "" {
				r.outcome, r.reason, r.stopCode = record.Aborted, "the link to the firmware closed", protocol.StopEStop
			}
			return false
		case errors.As(err, &r.fe):
			r.badFrame(r.fe.Reason)
		default:
			// An error the link does not classify: treat it as an outage.
			// If it lasts, the watchdog ends the run; the short pause keeps
			// a link that fails at once from spinning the loop.
			r.disconnected(err)
			time.Sleep(time.Millisecond)
		}
	}
	return false
}

// validReply checks a received message against the awaited sequence number
// and the drop and corrupt faults. A valid command is queued for its tick
// (now, or later under a latency fault) and resets the watchdog.
func (r *runner) validReply(lastValid *time.Time) bool {
	if r.msg.Type != protocol.TypeCommand {
		return false
	}
	if r.msg.Seq != r.seq {
		r.counts.StaleCommands++
		return false
	}
	if r.chance(FaultDrop, r.s.T, r.frng) {
		r.counts.DroppedCommand++
		return false
	}
	if r.chance(FaultCorrupt, r.s.T, r.frng) {
		r.counts.Corrupted++
		r.badFrame("injected corruption (a real link's CRC check rejects such a frame)")
		return false
	}
	*lastValid = time.Now()
	r.linkDown = false
	delay := r.latencyDelay(r.s.T, r.frng)
	k := int64(math.Round(delay.Seconds() * r.cfg.TickHz))
	if !r.pending.push(r.tick+k, &r.msg.Command) {
		r.counts.DroppedCommand++
	}
	return true
}

// stallSlack is how late a lockstep wait may end before the loop treats the
// lateness as a stall of its own process rather than firmware silence; Go
// timer wake-ups are late by up to about a millisecond on a busy host
// (measured here), so 5 ms is well clear of normal lateness.
const stallSlack = 5 * time.Millisecond

// sendState sends the tick's state unless a drop fault eats it.
func (r *runner) sendState() {
	if r.chance(FaultDrop, r.s.T, r.frng) {
		r.counts.DroppedStates++
		return
	}
	r.counts.StatesSent++
	// A Send that fails because the link is down or closed loses this
	// state; Recv reports the link's condition and the watchdog decides.
	r.conn.Send(&r.out)
}

// sendStop tells the firmware the run is over and why.
func (r *runner) sendStop() {
	var m protocol.Message
	m.Type = protocol.TypeStop
	m.Seq = r.seq + 1
	m.Stop.Reason = r.stopCode
	text := r.reason
	if text == "" {
		text = "run finished"
	}
	if len(text) > protocol.MaxNameLen {
		// Cut at a rune boundary so the firmware never gets half a "μ".
		cut := protocol.MaxNameLen
		for cut > 0 && !utf8.RuneStart(text[cut]) {
			cut--
		}
		text = text[:cut]
	}
	m.Stop.Text = text
	r.conn.Send(&m)
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
func evaluate(c *scenarios.Criteria, s *record.Summary) []record.Criterion {
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

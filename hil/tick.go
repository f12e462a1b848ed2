package hil

// This file owns one tick of the plant and its telemetry row: the plant
// state, input and result, what the sensors read, the hip pushes, the
// contact extremes of the run, and the row written to the record; and it
// turns plant events into step boundaries and alarms.

import (
	"fmt"
	"math"
	"time"

	"gaitrig/bridges/protocol"
	"gaitrig/plant"
	"gaitrig/record"
)

// plantTick is the plant side of the loop: everything one tick of the
// plant reads and writes, allocated once in newRunner.
type plantTick struct {
	tick int64 // index of the tick being run; after the loop, the number of ticks run
	s    plant.State
	in   plant.Input
	res  plant.TickResult
	tr   truth // noise-free reading of the plant, for the sensor bank

	pushes  []pushState
	contact contactExtremes // of the stance foot over the whole run
	knees   kneeExtremes    // of the locked knees of legs on the ground, over the whole run
	unlock  kneeUnlock      // knee latches the firmware asked to release (knees.go)

	// The row of the tick just stepped, and what it logs besides the plant.
	row       record.Tick
	recStart  time.Time                   // the record's start time, origin of Tick.WallS
	commanded [protocol.MaxJoints]float64 // torques of the command in force, as sent
	latUS     float64                     // round trip of this tick's command, µs (wall-clock; NaN without one)

	// What the gait demanded of each foot's friction this tick (see
	// demanded), whether the foot slid, and whether it struck the ground.
	demand       [2]float64
	slip, impact [2]bool

	rate0, rate1, angleTmp []float64 // joint rates before and after the step, scratch angles
}

type pushState struct {
	Push
	start float64 // resolved start time, NaN until known
}

// sense fills the session's outgoing state with what the firmware's
// sensors read this tick, under the next sequence number.
func (r *runner) sense() {
	pt, ss := &r.pt, &r.sess
	r.m.JointState(&pt.s, pt.tr.angle[:r.n], pt.tr.rate[:r.n])
	pt.tr.joints = r.n
	pt.tr.pitch, pt.tr.pitchV = r.m.IMU(&pt.s)
	pt.tr.normal = [2]float64{pt.res.Contacts[0].Normal, pt.res.Contacts[1].Normal}
	pt.tr.timeUS = uint64(math.Round(pt.s.T * 1e6))
	ss.out.Type = protocol.TypeState
	ss.seq++
	ss.out.Seq = ss.seq
	r.sens.read(pt.s.T, &pt.tr, &ss.out.State)
	r.beltSense(&ss.out.State)
}

// pushForce is the hip force over the tick that starts at t.
func (r *runner) pushForce(t float64) [2]float64 {
	var f [2]float64
	for i := range r.pt.pushes {
		p := &r.pt.pushes[i]
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
	pt := &r.pt
	applied := r.act.step()
	for i := 0; i < r.n; i++ {
		pt.in.Torque[i] = applied[i]
	}
	t0 := pt.s.T
	pt.in.HipForce = r.pushForce(t0)
	r.treadmillInput(t0)
	r.applyKneeUnlock()
	r.m.JointState(&pt.s, pt.angleTmp, pt.rate0)
	r.m.Step(&pt.s, &pt.in, r.dt, &pt.res)
	r.m.JointState(&pt.s, pt.angleTmp, pt.rate1)
	// Actuator work by the midpoint rule on the joint rate over the tick.
	var pos, neg float64
	for i := 0; i < r.n; i++ {
		p := applied[i] * 0.5 * (pt.rate0[i] + pt.rate1[i]) * r.dt
		if p > 0 {
			pos += p
		} else {
			neg += p
		}
	}
	r.demanded()
	st := pt.s.Stance
	fc := pt.res.Contacts[st] // a copy: the peak figures count a slip as at least 1
	fc.Utilization = pt.peakDemand(st)
	pt.contact.add(&fc)
	pt.knees.add(&pt.s, &pt.res.Contacts)
	r.steps.tick(pos, neg, &fc)
	if o := 1 - st; pt.slip[o] || pt.impact[o] {
		// The other foot struck or slid this tick (a heel strike reported
		// on the foot that leaves the ground, double support).
		pt.contact.peak(pt.peakDemand(o))
		r.steps.contact.peak(pt.peakDemand(o))
	}
	r.treadmillCheck()
	r.record(wall)
	for i := 0; i < pt.res.NumEvents; i++ {
		r.plantEvent(&pt.res.Events[i])
	}
	if pt.res.Dropped > 0 {
		r.al.info("events_dropped", pt.tick, pt.s.T, fmt.Sprintf("%d plant events in one tick did not fit the tick record", pt.res.Dropped), nil)
	}
	if pt.res.Stopped && !r.end.set() {
		reason := "the plant stopped at an event it was told not to continue past"
		for i := pt.res.NumEvents - 1; i >= 0; i-- {
			if k, ok := alarmKind(pt.res.Events[i].Kind); ok {
				reason = "the plant stopped at " + k + " (physics set to stop there)"
				break
			}
		}
		r.end.end(record.Fail, reason, protocol.StopEnd)
	}
	if r.onTick != nil {
		r.onTick()
	}
	pt.tick++
}

// record writes the telemetry row of the tick just stepped. The row holds
// the state at the end of the tick, the readings the firmware was sent at
// its start and the torques held over it.
func (r *runner) record(wall time.Time) {
	if r.rec == nil {
		return
	}
	pt := &r.pt
	row := &pt.row
	row.Index = pt.tick
	row.T = pt.s.T
	if r.cfg.Clock == Wallclock {
		row.WallS = wall.Sub(pt.recStart).Seconds()
		row.LatencyUS = pt.latUS
	} else {
		// Lockstep logs must be identical run to run: no wall time, no latency.
		row.WallS = 0
		row.LatencyUS = math.NaN()
	}
	nq := r.m.NumDOF()
	copy(row.Q[:nq], pt.s.Q[:nq])
	copy(row.V[:nq], pt.s.V[:nq])
	sent := &r.sess.out.State
	for i := 0; i < r.n; i++ {
		row.Angle[i] = float64(sent.Angle[i])
		row.Rate[i] = float64(sent.Rate[i])
		row.Commanded[i] = pt.commanded[i]
		row.Applied[i] = pt.in.Torque[i]
	}
	row.Push = pt.in.HipForce
	for i := 0; i < 2; i++ {
		c := &pt.res.Contacts[i]
		row.Feet[i] = record.Foot{Mode: int(c.Mode), NormalN: c.Normal, TangentialN: c.Tangential,
			Utilization: pt.demand[i], Slip: pt.slip[i], CoP: c.CoP, ContactX: c.Point[0],
			KneeLocked: pt.s.KneeLocked[i], KneeTorqueNM: c.KneeTorque}
	}
	row.Kinetic, row.Potential = r.m.Energy(&pt.s)
	row.Fresh = r.fresh
	row.Stance = pt.s.Stance
	row.BeltSpeed, row.BeltPos = r.tm.speed, r.tm.posOrNaN()
	if err := r.rec.Tick(row); err != nil && !r.end.set() {
		r.end.end(record.Aborted, "telemetry could not be written: "+err.Error(), protocol.StopAborted)
	}
}

// demanded works out the friction the gait asked of each foot this tick.
// A rolling foot asks |F_t|/(μ_s N), which the plant reports. A heel strike
// asks its impulse ratio |Λ_t|/Λ_n of μ_s, which the plant reports only in
// the event: an impact slip is over in no time, so the force of the tick
// after it never shows it. A sliding foot is held to μ_k N, which reads
// below 1 and hides the slip: it is flagged instead, and the peak figures
// count it as at least 1.
func (r *runner) demanded() {
	pt := &r.pt
	for i := 0; i < 2; i++ {
		c := &pt.res.Contacts[i]
		pt.demand[i] = c.Utilization
		pt.slip[i] = c.Mode == plant.Sliding
		pt.impact[i] = false
	}
	for k := 0; k < pt.res.NumEvents; k++ {
		e := &pt.res.Events[k]
		if e.Foot < 0 || e.Foot > 1 {
			continue
		}
		switch e.Kind {
		case plant.HeelStrike, plant.ImpactSlip:
			pt.impact[e.Foot] = true
			if e.Limit > 0 {
				pt.demand[e.Foot] = math.Max(pt.demand[e.Foot], e.Value/e.Limit)
			}
			if e.Kind == plant.ImpactSlip {
				pt.slip[e.Foot] = true
			}
		case plant.FrictionLimit:
			pt.demand[e.Foot] = math.Max(pt.demand[e.Foot], e.Value)
			pt.slip[e.Foot] = true
		}
	}
}

// peakDemand is foot i's demand for the peak figures: a slip counts as at
// least 1, whatever force the sliding foot was held to.
func (pt *plantTick) peakDemand(i int) float64 {
	d := pt.demand[i]
	if pt.slip[i] && !(d >= 1) && !math.IsNaN(d) {
		d = 1
	}
	return d
}

// alarmKind maps a plant event to its alarm kind; heel strikes, toe-offs and
// re-sticking are normal walking, not alarms.
func alarmKind(k plant.EventKind) (string, bool) {
	switch k {
	case plant.FrictionLimit:
		return AlarmFrictionLimit, true
	case plant.LiftOff:
		return AlarmLiftOff, true
	case plant.ImpactSlip:
		return AlarmImpactSlip, true
	case plant.Scuff, plant.Touchdown:
		return AlarmFootScuff, true
	case plant.Fall:
		return AlarmFall, true
	case plant.NonFinite, plant.BadInput:
		return AlarmNonFinite, true
	case plant.KneeBuckle:
		return AlarmKneeBuckle, true
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
	if r.al.raise(kind, r.pt.tick, e.T, e.Foot, e.Segment, func() (string, map[string]float64) {
		return plantMessage(&ev), map[string]float64{"value": ev.Value, "limit": ev.Limit}
	}) {
		r.trip(protocol.StopEStop)
	}
}

// footName names foot i in a message, with the record's words for the feet.
func footName(i int) string {
	if i == 0 || i == 1 {
		return record.FootNames[i]
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
	case plant.KneeBuckle:
		return fmt.Sprintf("%s knee would need its stop to pull (lock torque %.4g N·m) and has no latch: it buckles", f, e.Value)
	}
	return e.Kind.String()
}

// heelStrike closes a step.
func (r *runner) heelStrike(e *plant.Event) {
	pt := &r.pt
	st := r.steps.strike(r.m, &pt.s, e, &pt.res)
	if r.rec != nil {
		if err := r.rec.Step(st); err != nil && !r.end.set() {
			r.end.end(record.Aborted, "steps table could not be written: "+err.Error(), protocol.StopAborted)
		}
	}
	for i := range pt.pushes {
		if p := &pt.pushes[i]; p.AtStep == st.Index {
			p.start = pt.s.T
		}
	}
	r.beltStep(st.Index, pt.s.T, st.DurationS)
	if r.cfg.OnStep != nil {
		r.cfg.OnStep(StepInfo{Index: st.Index, DurationS: st.DurationS, LengthM: st.LengthM, SpeedMPS: st.SpeedMPS,
			PeakUtil: st.PeakUtilization, MinNormal: st.MinNormalN, SimTimeS: pt.s.T, EndS: st.EndS})
	}
	if r.cfg.AfterHeelStrike != nil {
		r.cfg.AfterHeelStrike(st.Index, e.T, &pt.s, &pt.in)
	}
}

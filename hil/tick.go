package hil

// This file holds one tick of the plant: sensing, pushes, integration,
// telemetry and plant events.

import (
	"fmt"
	"math"
	"time"

	"gaitrig/bridges/protocol"
	"gaitrig/plant"
	"gaitrig/record"
)

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

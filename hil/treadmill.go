package hil

// This file owns the treadmill side of a run: the belt's speed for each
// tick (its profile, and the perturbation pulses timed by the walker's
// steps), the walker's position on the belt with the alarms near and past
// its ends, and the overhead fall-arrest harness.

import (
	"fmt"
	"math"

	"gaitrig/bridges/protocol"
	"gaitrig/plant"
)

// Belt is the treadmill of a run. The belt itself is the plant terrain's
// belt segment (its length and place); this is how it is driven and
// watched.
type Belt struct {
	// Profile is the belt speed as a function of time, pulses at fixed
	// times included.
	Profile plant.BeltProfile
	// StepPulses are perturbations timed by the gait.
	StepPulses []StepPulse
	// EndMargin raises belt_end_near when the hip or a foot comes within
	// this distance of either end of the belt, m; 0 means DefaultEndMargin.
	EndMargin float64
}

// DefaultEndMargin is the default distance from a belt end at which
// belt_end_near is raised: a little more than half a step of the demo
// walker, so the alarm leaves a step to react (our choice).
const DefaultEndMargin = 0.3

// StepPulse is a belt perturbation that starts at a phase of a step: at
// the heel strike that completes step AtStep plus Phase times that step's
// duration (Phase 0.1: early stance of the next step). Pulse gives its
// size and shape; its Start is filled in when the step happens.
type StepPulse struct {
	AtStep int             // the step whose closing heel strike starts the phase count
	Phase  float64         // fraction of that step's duration after the heel strike
	Pulse  plant.BeltPulse // size and shape; Start is set when the step happens
}

// Harness is the overhead fall-arrest harness: a rope from a fixed point
// Height above the hip's initial position, of length Height + Drop, that
// pulls the hip only when stretched beyond its length, as a stiff damped
// one-sided spring: tension k·(d − L) + c·ḋ while d > L (d the hip's
// distance from the anchor), never negative, along the rope toward the
// anchor. Whether a catch ends the run is the severity of harness_caught
// (default trip).
type Harness struct {
	// Height is the anchor's height above the hip's initial position, m.
	Height float64
	// Drop is the slack: how far the hip may drop straight below the
	// anchor before the rope goes taut, m.
	Drop float64
	// Stiffness k, N/m; 0 means DefaultRopeStiffness.
	Stiffness float64
	// Damping c, N·s/m; 0 means DefaultRopeDamping.
	Damping float64
}

// Defaults of the harness rope, for a walker of tens of kilograms (demo
// constants of our own, not a rope's data sheet): the demo walker (28 kg)
// hanging still stretches it by 1.4 cm, and the damping makes a catch
// settle within a few bounces (damping ratio about 0.5 on the whole
// walker's mass). At a 1 kHz tick the rope's period (about 0.23 s on the
// hip alone) spans hundreds of ticks, so holding its force over a tick is
// accurate.
const (
	DefaultRopeStiffness = 20000.0 // N/m
	DefaultRopeDamping   = 750.0   // N·s/m
)

// treadmill is the run's belt and harness state, allocated in newTreadmill.
type treadmill struct {
	belt       *Belt
	profile    plant.BeltProfile // Belt.Profile with room for the step pulses
	pending    []StepPulse       // step pulses not yet started
	rear, tan  [2]float64        // belt rear end and unit tangent
	length     float64
	margin     float64
	near       bool    // belt_end_near raised and not yet cleared
	passed     bool    // belt_end_passed raised
	speed, pos float64 // belt speed at the end of the last tick (the telemetry column), hip place on the belt
	next       float64 // the profile's speed at the end of the tick being stepped

	harness        *Harness
	anchor         [2]float64 // the rope's fixed point
	rope           float64    // its length
	taut           bool
	tension, peak  float64
	caughtReported bool
}

func (r *runner) newTreadmill() error {
	tm := &r.tm
	if b := r.cfg.Belt; b != nil {
		rear, front, ok := r.m.BeltEnds()
		if !ok {
			return fmt.Errorf("hil: a belt is configured but the terrain has no belt segment")
		}
		if err := b.Profile.Validate(); err != nil {
			return fmt.Errorf("hil: belt profile: %w", err)
		}
		tm.belt = b
		tm.rear = rear
		dx, dy := front[0]-rear[0], front[1]-rear[1]
		tm.length = math.Hypot(dx, dy)
		tm.tan = [2]float64{dx / tm.length, dy / tm.length}
		tm.margin = b.EndMargin
		if tm.margin == 0 {
			tm.margin = DefaultEndMargin
		}
		// The pulses slice has room for every step pulse, so starting one
		// in the tick loop does not allocate.
		tm.profile.Points = b.Profile.Points
		tm.profile.Pulses = make([]plant.BeltPulse, len(b.Profile.Pulses), len(b.Profile.Pulses)+len(b.StepPulses))
		copy(tm.profile.Pulses, b.Profile.Pulses)
		tm.pending = append([]StepPulse(nil), b.StepPulses...)
		tm.speed = tm.profile.Speed(r.pt.s.T)
		// The first tick's readings come from the initial contacts: on
		// the belt their slip is measured against the running surface.
		r.pt.res.Contacts = r.m.Contacts(&r.pt.s, &plant.Input{Belt: plant.BeltMotion{Speed: tm.speed}})
		for _, pu := range b.Profile.Pulses {
			// Timed pulses are known now; step pulses are logged when
			// their step comes (beltStep). The report marks both.
			r.al.info("belt_pulse", 0, r.pt.s.T, fmt.Sprintf("belt pulse of %+.3g m/s over %.3g s scheduled at %.4g s", pu.Delta, pu.Rise, pu.Start),
				map[string]float64{"start_s": pu.Start, "delta_mps": pu.Delta})
		}
	}
	if h := r.cfg.Harness; h != nil {
		hh := *h
		if hh.Stiffness == 0 {
			hh.Stiffness = DefaultRopeStiffness
		}
		if hh.Damping == 0 {
			hh.Damping = DefaultRopeDamping
		}
		if !(hh.Height > 0) || !(hh.Drop > 0) || !(hh.Stiffness > 0) || !(hh.Damping >= 0) || !finite(hh.Height+hh.Drop+hh.Stiffness+hh.Damping) {
			return fmt.Errorf("hil: harness: want a height > 0 m, a drop > 0 m, a stiffness > 0 N/m and a damping ≥ 0 N·s/m")
		}
		tm.harness = &hh
		tm.anchor = [2]float64{r.pt.s.Q[0], r.pt.s.Q[1] + hh.Height}
		tm.rope = hh.Height + hh.Drop
	}
	return nil
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// beltInput sets the belt motion of the tick [t, t+dt] and adds the rope's
// pull to the hip force.
func (r *runner) treadmillInput(t float64) {
	tm, pt := &r.tm, &r.pt
	if tm.belt != nil {
		// The tick starts at the speed the last one ended with (the
		// telemetry column) and ends at the profile's speed: a replay
		// rebuilds exactly this input from two recorded numbers.
		tm.next = tm.profile.Speed(t + r.dt)
		pt.in.Belt = plant.BeltMotion{Speed: tm.speed, Accel: (tm.next - tm.speed) / r.dt}
	}
	if h := tm.harness; h != nil {
		f := ropeForce(h, tm.anchor, tm.rope, &pt.s)
		tm.tension = math.Hypot(f[0], f[1])
		pt.in.HipForce[0] += f[0]
		pt.in.HipForce[1] += f[1]
	}
}

// ropeForce is the harness rope's force on the hip at state s: the
// one-sided spring-damper along the rope, zero while the rope is slack or
// would push.
func ropeForce(h *Harness, anchor [2]float64, length float64, s *plant.State) [2]float64 {
	dx, dy := s.Q[0]-anchor[0], s.Q[1]-anchor[1]
	d := math.Hypot(dx, dy)
	if d <= length {
		return [2]float64{}
	}
	ux, uy := dx/d, dy/d
	rate := ux*s.V[0] + uy*s.V[1] // ḋ
	tension := h.Stiffness*(d-length) + h.Damping*rate
	if tension <= 0 {
		return [2]float64{}
	}
	return [2]float64{-tension * ux, -tension * uy}
}

// treadmillCheck watches the walker's place on the belt and the harness
// after the tick ending at the plant's current state.
func (r *runner) treadmillCheck() {
	tm, pt := &r.tm, &r.pt
	if tm.belt != nil {
		mo := &pt.in.Belt
		tm.speed = tm.next
		// The surface's travel over the tick, along x (the speed is
		// positive backward).
		r.steps.beltX -= (mo.Speed*r.dt + 0.5*mo.Accel*r.dt*r.dt) * tm.tan[0]
		pose := r.m.Points(&pt.s)
		tm.pos = tm.along(pose.Hip)
		least, what := tm.pos, "hip"
		for i := 0; i < r.m.NumFeet(); i++ {
			if a := tm.along(pose.Foot[i]); a < least {
				least, what = a, footName(i)+" foot"
			}
			if a := tm.length - tm.along(pose.Foot[i]); a < least {
				least, what = a, footName(i)+" foot"
			}
		}
		if a := tm.length - tm.pos; a < least {
			least, what = a, "hip"
		}
		switch {
		case least < 0 && !tm.passed:
			tm.passed = true
			if r.al.raise(AlarmBeltEndPassed, pt.tick, pt.s.T, -1, -1, func() (string, map[string]float64) {
				return fmt.Sprintf("the %s is %.3g m beyond an end of the %.3g m belt: the walker is off the belt", what, -least, tm.length),
					map[string]float64{"value": least, "position_m": tm.pos}
			}) {
				r.trip(protocol.StopEStop)
			}
		case least < tm.margin && !tm.near:
			tm.near = true
			if r.al.raise(AlarmBeltEndNear, pt.tick, pt.s.T, -1, -1, func() (string, map[string]float64) {
				return fmt.Sprintf("the %s is %.3g m from an end of the belt (margin %.3g m); the hip is %.3g m from the rear end", what, least, tm.margin, tm.pos),
					map[string]float64{"value": least, "limit": tm.margin, "position_m": tm.pos}
			}) {
				r.trip(protocol.StopEStop)
			}
		case least >= tm.margin:
			tm.near = false
		}
	}
	if tm.harness != nil {
		taut := tm.tension > 0
		switch {
		case taut && tm.tension >= tm.peak:
			tm.peak = tm.tension
		case tm.taut && !tm.caughtReported:
			// The tension fell from its peak: the catch has happened.
			tm.caughtReported = true
			peak := tm.peak
			if r.al.raise(AlarmHarnessCaught, pt.tick, pt.s.T, -1, -1, func() (string, map[string]float64) {
				return fmt.Sprintf("the harness caught the walker: peak rope force %.4g N", peak), map[string]float64{"value": peak}
			}) {
				r.trip(protocol.StopEStop)
			}
		}
		if !taut && tm.taut {
			// Slack again: the next catch is a new one.
			tm.caughtReported, tm.peak = false, 0
		}
		tm.taut = taut
	}
}

// along is the distance of p from the belt's rear end, along the belt.
func (tm *treadmill) along(p [2]float64) float64 {
	return (p[0]-tm.rear[0])*tm.tan[0] + (p[1]-tm.rear[1])*tm.tan[1]
}

// beltStep starts the step pulses due at the heel strike that completed
// step index (of duration dur) at time t.
func (r *runner) beltStep(index int, t, dur float64) {
	tm := &r.tm
	for i := 0; i < len(tm.pending); {
		p := tm.pending[i]
		if p.AtStep != index {
			i++
			continue
		}
		pu := p.Pulse
		pu.Start = t + p.Phase*dur
		tm.profile.Pulses = append(tm.profile.Pulses, pu) // within capacity
		tm.pending = append(tm.pending[:i], tm.pending[i+1:]...)
		r.al.info("belt_pulse", r.pt.tick, t, fmt.Sprintf("belt pulse of %+.3g m/s over %.3g s scheduled at %.4g s (step %d, phase %.2f)", pu.Delta, pu.Rise, pu.Start, index, p.Phase),
			map[string]float64{"start_s": pu.Start, "delta_mps": pu.Delta})
	}
}

// posOrNaN is the hip's position on the belt for the telemetry row, NaN
// without a belt.
func (tm *treadmill) posOrNaN() float64 {
	if tm.belt == nil {
		return math.NaN()
	}
	return tm.pos
}

// beltSense tells the firmware where the walker is on the belt: the hip's
// distance from the middle of the belt along it, to the millimetre, with
// the ContactBelt bit that says the field is valid (docs/protocol.md
// section 3.3). Off a treadmill it leaves the state as the sensors made it
// (bit clear, field 0), byte for byte what a rig without belts sent. The
// place is exact: a lab measures it with a distance sensor far finer than a
// millimetre, so the sensor model's noise does not apply to it.
func (r *runner) beltSense(out *protocol.State) {
	tm := &r.tm
	out.BeltMM = 0
	if tm.belt == nil {
		return
	}
	hip := [2]float64{r.pt.s.Q[0], r.pt.s.Q[1]}
	out.Contacts |= protocol.ContactBelt
	out.BeltMM = protocol.BeltMMOf(tm.along(hip) - tm.length/2)
}

// Package reference is gaitrig's built-in reference firmware: a walking
// controller for the torso walker (and a simple one for the compass walker)
// and a runner that speaks the wire protocol over any bridges.Conn exactly
// as a controller board would.
//
// The control law is a pure function of one sensor reading: no filter
// state, no timers, no memory between ticks. That is what lets the gait
// finder treat the closed loop as an autonomous walker and report how
// stable the controller's gait is, and it makes a port to C trivial to
// check: the same reading gives the same torques.
package reference

import "math"

// Reading is what the firmware measures at one tick, in the units and
// conventions of the wire protocol (docs/protocol.md):
//
//   - Angle[j], Rate[j]: joint angle (rad) and rate (rad/s), in the joint
//     order of the rig's configuration. Torso walker: joint 0 is hip_left =
//     θ_left − θ_torso, joint 1 is hip_right = θ_right − θ_torso. Compass
//     walker: joint 0 is hip = θ_right − θ_left.
//   - Pitch, PitchRate: absolute angle (rad, counter-clockwise from the
//     vertical, forward lean negative) and rate of the link carrying the
//     IMU: the torso, or the left leg of a compass walker.
//   - Contacts: bit 0 left foot switch closed, bit 1 right foot switch.
type Reading struct {
	Joints    int        // joints the rig configured: 2 torso walker, 1 compass walker, plus Knees
	Angle     [2]float64 // hip joint angles, rad
	Rate      [2]float64 // hip joint rates, rad/s
	Pitch     float64    // IMU link's absolute angle, rad
	PitchRate float64    // IMU link's absolute rate, rad/s
	Contacts  uint8      // foot switches: bit 0 left, bit 1 right
	// OnBelt says the walker is on a treadmill belt (BeltPos is valid).
	OnBelt bool
	// BeltPos is the walker's place on the belt: the hip's distance from
	// the middle of the belt, m, positive forward
	// (protocol.State.BeltPosition); 0 when not OnBelt.
	BeltPos float64
	// Knees is the number of actuated knee joints that follow the hips
	// (knee_left, knee_right): 0 or 2.
	Knees int
	// KneeAngle holds the knee angles, left then right, rad
	// (θ_shank − θ_thigh: 0 straight at the stop, negative flexed).
	KneeAngle [2]float64
	// KneeRate holds the knee rates, left then right, rad/s.
	KneeRate [2]float64
}

// Gains are the constants of the control law. Every one is a plain number
// so the law can be ported exactly; DefaultGains gives the tuned values for
// the demo walker (plant.DemoParams).
type Gains struct {
	// TargetSpeed is the forward walking speed the law regulates, m/s.
	TargetSpeed float64
	// LegLength converts the stance leg's angular rate into a forward speed
	// estimate v = −LegLength·ω_stance, m.
	LegLength float64
	// StepAngle is the absolute swing-leg angle the swing hip aims for at
	// the target speed, rad (positive: foot ahead of the hip).
	StepAngle float64
	// StepSpeedGain lengthens the step when the walker is faster than the
	// target: target angle = StepAngle + StepSpeedGain·(v − TargetSpeed),
	// rad per m/s.
	StepSpeedGain float64
	// StepMin and StepMax bound the swing-leg target angle, rad.
	StepMin, StepMax float64
	// SwingKp and SwingKd are the swing hip's PD gains on the absolute
	// swing-leg angle, N·m/rad and N·m·s/rad.
	SwingKp, SwingKd float64
	// Lean is the torso pitch the stance hip holds at the target speed,
	// rad; negative leans forward, which pushes the stance leg back and the
	// walker forward.
	Lean float64
	// LeanSpeedGain leans further forward when the walker is slow: pitch
	// target = Lean − LeanSpeedGain·(TargetSpeed − v), rad per m/s.
	LeanSpeedGain float64
	// LeanMin and LeanMax bound the pitch target, rad.
	LeanMin, LeanMax float64
	// TorsoKp and TorsoKd are the stance hip's PD gains on the torso pitch,
	// N·m/rad and N·m·s/rad.
	TorsoKp, TorsoKd float64
	// TorqueLimit clips every output torque, N·m (the firmware's own limit;
	// the rig enforces its configured limit as well).
	TorqueLimit float64
	// Belt is the belt term, which moves TargetSpeed to hold the walker's
	// place on a treadmill (belt.go).
	Belt BeltGains
	// Knee holds the gains of the knee law (knees.go), used when the
	// walker has two actuated knees.
	Knee KneeGains
}

// DefaultGains are tuned for the demo walker of plant.DemoParams on level
// ground and slopes of ±2° (sim_test.go runs them; policy_test.go finds
// the closed-loop gait and checks it is stable). The values, for a port:
//
//	TargetSpeed   0.8    m/s        LegLength     0.9    m
//	StepAngle     0.30   rad        StepSpeedGain 0.15   rad per m/s
//	StepMin       0.15   rad        StepMax       0.45   rad
//	SwingKp       80     N·m/rad    SwingKd       10     N·m·s/rad
//	Lean         -0.10   rad        LeanSpeedGain 0.3    rad per m/s
//	LeanMin      -0.35   rad        LeanMax       0.05   rad
//	TorsoKp       400    N·m/rad    TorsoKd       40     N·m·s/rad
//	TorqueLimit   50     N·m (lowered to the rig's smallest configured
//	                         limit when that is lower, see Serve)
//
// On the demo walker they settle at about 0.78 m/s with 0.48 m steps on
// level ground, 0.42 m/s uphill and 1.02 m/s downhill at 2°; the
// proportional speed terms leave that offset from TargetSpeed.
func DefaultGains() Gains {
	return Gains{
		TargetSpeed:   0.8,
		LegLength:     0.9,
		StepAngle:     0.30,
		StepSpeedGain: 0.15,
		StepMin:       0.15,
		StepMax:       0.45,
		SwingKp:       80,
		SwingKd:       10,
		Lean:          -0.10,
		LeanSpeedGain: 0.3,
		LeanMin:       -0.35,
		LeanMax:       0.05,
		TorsoKp:       400,
		TorsoKd:       40,
		TorqueLimit:   50,
		Belt:          DefaultBeltGains(),
		Knee:          DefaultKneeGains(),
	}
}

// Law computes the joint torques for one reading. It is a pure function:
// the result depends on g and r only. It writes r.Joints torques to
// tau in joint order and returns the stance leg it decided on (0 left,
// 1 right).
//
// Torso walker (r.Joints == 2), step by step:
//
//	θT = Pitch, ωT = PitchRate                        torso angle and rate
//	θL = Angle[0] + θT, ωL = Rate[0] + ωT             absolute left leg
//	θR = Angle[1] + θT, ωR = Rate[1] + ωT             absolute right leg
//	stance st:
//	    Contacts == 1 (left only)   → st = 0
//	    Contacts == 2 (right only)  → st = 1
//	    Contacts == 3 (both)        → the leg further forward (larger θ):
//	                                  it has just landed; ties → 0
//	    Contacts == 0 (none)        → the leg rotating backward faster
//	                                  (smaller ω); ties → 0
//	sw = 1 − st
//	v = −LegLength · ω_st                             forward speed estimate
//	e = v − TargetSpeed                               (on a belt TargetSpeed is first
//	                                                  moved by the belt term, belt.go)
//	φ* = clamp(StepAngle + StepSpeedGain·e, StepMin, StepMax)
//	τ_sw = SwingKp·(φ* − θ_sw) − SwingKd·ω_sw         swing hip
//	θT* = clamp(Lean + LeanSpeedGain·e, LeanMin, LeanMax)
//	τ_st = TorsoKp·(θT − θT*) + TorsoKd·ωT − τ_sw     stance hip
//	τ_st, τ_sw each clipped to ±TorqueLimit
//
// (clamp(x, lo, hi) = min(max(x, lo), hi).) A hip torque τ acts +τ on its
// leg and −τ on the torso, so the torso feels −τ_st − τ_sw = TorsoKp·(θT* −
// θT) − TorsoKd·ωT before clipping: the stance hip holds the torso and
// cancels the reaction of the swing hip. Leaning forward when slow (e < 0
// makes θT* more negative) pushes the stance leg back harder.
//
// Compass walker (r.Joints == 1): the IMU is on the left leg, so θL = Pitch
// and θR = Angle[0] + Pitch; stance and speed as above; the single hip
// torque places the swing leg: τ_sw as above, applied as +τ_sw on the right
// leg when the right leg swings and as −τ_sw (the same swing-leg torque
// seen from the other side) when the left leg swings.
func Law(g *Gains, r *Reading, tau []float64) (stance int) {
	gb := withBelt(g, r) // on a belt: the speed target holds the walker's place (belt.go)
	g = &gb
	switch r.Joints - r.Knees {
	case 2:
		thT, wT := r.Pitch, r.PitchRate
		th := [2]float64{r.Angle[0] + thT, r.Angle[1] + thT}
		w := [2]float64{r.Rate[0] + wT, r.Rate[1] + wT}
		st, e, tSw := placeSwing(g, r.Contacts, th, w)
		sw := 1 - st
		lean := clamp(g.Lean+g.LeanSpeedGain*e, g.LeanMin, g.LeanMax)
		tSt := g.TorsoKp*(thT-lean) + g.TorsoKd*wT - tSw
		tau[st] = clamp(tSt, -g.TorqueLimit, g.TorqueLimit)
		tau[sw] = clamp(tSw, -g.TorqueLimit, g.TorqueLimit)
		kneeTorques(g, r, 2, st, e, th[sw], tau)
		return st
	case 1:
		th := [2]float64{r.Pitch, r.Angle[0] + r.Pitch}
		w := [2]float64{r.PitchRate, r.Rate[0] + r.PitchRate}
		st, e, tSw := placeSwing(g, r.Contacts, th, w)
		if st == 1 { // the left leg swings
			tSw = -tSw
		}
		tau[0] = clamp(tSw, -g.TorqueLimit, g.TorqueLimit)
		kneeTorques(g, r, 1, st, e, th[1-st], tau)
		return st
	}
	for i := range tau {
		tau[i] = 0
	}
	return 0
}

// placeSwing is the part of Law both walkers share: it picks the stance leg
// from the foot switches and the absolute leg angles th and rates w, and
// aims the swing leg at the step angle for the speed error. It returns the
// stance leg, the speed error e (the torso lean uses it too) and the
// swing-leg torque τ_sw.
func placeSwing(g *Gains, contacts uint8, th, w [2]float64) (stance int, e, tSw float64) {
	st := pickStance(contacts, th, w)
	sw := 1 - st
	e = -g.LegLength*w[st] - g.TargetSpeed
	phi := clamp(g.StepAngle+g.StepSpeedGain*e, g.StepMin, g.StepMax)
	tSw = g.SwingKp*(phi-th[sw]) - g.SwingKd*w[sw]
	return st, e, tSw
}

// pickStance decides the stance leg from the foot switches, falling back to
// the leg angles and rates (see Law).
func pickStance(contacts uint8, th, w [2]float64) int {
	switch contacts & 3 {
	case 1:
		return 0
	case 2:
		return 1
	case 3:
		if th[1] > th[0] {
			return 1
		}
		return 0
	}
	if w[1] < w[0] {
		return 1
	}
	return 0
}

// MaxJoints is the most joints the law drives: two hips and two knees.
const MaxJoints = 4

func clamp(x, lo, hi float64) float64 { return math.Min(math.Max(x, lo), hi) }

// DemoStart is a starting pose from which DefaultGains walk the demo walker
// (plant.DemoParams) into their steady gait within a few steps: left foot
// in stance at x = 0, legs at ±0.25 rad, torso leaning 0.1 rad forward,
// link rates (left, right, torso) in rad/s. Pass it to plant.Model.Stand.
var DemoStart = struct {
	LegAngles  [2]float64
	TorsoAngle float64
	Rates      [3]float64
}{LegAngles: [2]float64{0.25, -0.25}, TorsoAngle: -0.1, Rates: [3]float64{-0.9, 0.5, 0}}

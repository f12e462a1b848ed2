package reference

import "gaitrig/plant"

// Knee control: the part of the law for a walker whose two knees are
// actuated (joints knee_left and knee_right after the hips). It lives in its
// own file so the hip law (law.go) stays as it was; Law calls kneeTorques
// once after the hip torques.
//
// The law stays a pure function of the reading. It tells early swing from
// late swing by where the swing thigh is, not by a timer: while the swing
// thigh is more than KneeExtendLead behind the step angle the hip aims for,
// the swing knee flexes toward KneeFlex so the foot clears the ground; past
// that it extends into its stop, which it strikes (and a latch, if the knee
// has one, engages) before the heel strikes. The stance knee is pushed
// into its stop with KneeHold: a knee with a latch is held by the latch
// anyway, and a knee without one stays locked as long as the stop pushes,
// which the extra extension torque helps.

// KneeGains are the constants of the knee part of the law (see
// DefaultKneeGains for the tuned values).
type KneeGains struct {
	// Flex is the knee angle the swing knee aims for in early swing, rad
	// (negative: flexed, the foot back).
	Flex float64
	// ExtendLead is how far behind the step angle the swing thigh may be
	// when the swing knee starts to extend, rad.
	ExtendLead float64
	// SwingKp and SwingKd are the swing knee's PD gains on the knee angle,
	// N·m/rad and N·m·s/rad.
	SwingKp, SwingKd float64
	// Hold is the extension torque on the stance knee, N·m (≥ 0 pushes the
	// knee into its stop).
	Hold float64
	// Stop is the knee angle of the walker's knee stop, rad (the scenario's
	// knee_stop_rad; 0 straight): late in swing the knee is driven to it,
	// so it strikes the stop and latches. The firmware cannot read it from
	// the plant; set it as the walker is built.
	Stop float64
}

// DefaultKneeGains are tuned for the kneed demo walker (KneedDemoParams,
// the level-kneed built-in scenario) from DemoStart; knees_test.go and the
// rig's library test walk it. The values, for a
// port:
//
//	Flex       -0.9  rad        ExtendLead  0.12  rad
//	SwingKp     30   N·m/rad    SwingKd     2     N·m·s/rad
//	Hold        5    N·m        Stop        0     rad
func DefaultKneeGains() KneeGains {
	return KneeGains{Flex: -0.9, ExtendLead: 0.12, SwingKp: 30, SwingKd: 2, Hold: 5}
}

// kneeSettings are the knee gains' names under controller.settings.
var kneeSettings = map[string]func(g *Gains) *float64{
	"knee_flex_rad":        func(g *Gains) *float64 { return &g.Knee.Flex },
	"knee_extend_lead_rad": func(g *Gains) *float64 { return &g.Knee.ExtendLead },
	"knee_swing_kp":        func(g *Gains) *float64 { return &g.Knee.SwingKp },
	"knee_swing_kd":        func(g *Gains) *float64 { return &g.Knee.SwingKd },
	"knee_hold_nm":         func(g *Gains) *float64 { return &g.Knee.Hold },
	"knee_stop_rad":        func(g *Gains) *float64 { return &g.Knee.Stop },
}

func init() {
	for k, f := range kneeSettings {
		settingNames[k] = f
	}
}

// kneeTorques writes the knee torques of a reading with two actuated knees
// (r.Knees == 2) to tau[hips] (left) and tau[hips+1] (right); any other
// r.Knees leaves the knees passive (zero torque). st is the stance leg the
// hip law chose, e its speed error and thSw the swing thigh's absolute
// angle. Step by step:
//
//	φ* = clamp(StepAngle + StepSpeedGain·e, StepMin, StepMax)   as the hip law
//	κ_j = KneeAngle[j], κ̇_j = KneeRate[j]                       knee angle and rate
//	swing target κ* = Knee.Flex   while θ_sw < φ* − Knee.ExtendLead
//	                  Knee.Stop   after (the stop, 0 straight)
//	τ_sw = Knee.SwingKp·(κ* − κ_sw) − Knee.SwingKd·κ̇_sw
//	τ_st = Knee.Hold
//	both clipped to ±TorqueLimit
func kneeTorques(g *Gains, r *Reading, hips, st int, e, thSw float64, tau []float64) {
	if r.Knees != 2 || hips+2 > len(tau) {
		for j := hips; j < len(tau); j++ {
			tau[j] = 0
		}
		return
	}
	k := &g.Knee
	sw := 1 - st
	phi := clamp(g.StepAngle+g.StepSpeedGain*e, g.StepMin, g.StepMax)
	target := k.Stop
	if thSw < phi-k.ExtendLead {
		target = k.Flex
	}
	tSw := k.SwingKp*(target-r.KneeAngle[sw]) - k.SwingKd*r.KneeRate[sw]
	tau[hips+sw] = clamp(tSw, -g.TorqueLimit, g.TorqueLimit)
	tau[hips+st] = clamp(k.Hold, -g.TorqueLimit, g.TorqueLimit)
}

// kneeJoints counts the actuated knees among a rig's joint names (in the
// rig's order): 2 when the list ends in knee_left, knee_right after one or
// two hips, else 0 (the law then leaves any other knee passive).
func kneeJoints(names []string) int {
	n := len(names)
	if n >= 3 && n <= MaxJoints && names[n-2] == "knee_left" && names[n-1] == "knee_right" {
		return 2
	}
	return 0
}

// setJoints spreads joint angles and rates in the rig's order (hips, then
// r.Knees knees) over Angle/Rate and KneeAngle/KneeRate.
func (r *Reading) setJoints(angle, rate []float64) {
	hips := len(angle) - r.Knees
	for i := range angle {
		if i < hips {
			if i < len(r.Angle) {
				r.Angle[i], r.Rate[i] = angle[i], rate[i]
			}
			continue
		}
		r.KneeAngle[i-hips], r.KneeRate[i-hips] = angle[i], rate[i]
	}
}

// KneedDemoParams is the kneed demo walker DefaultKneeGains are tuned for:
// plant.DemoParams with each leg a thigh and a shank (0.45 m each, demo
// numbers of our own) joined by an actuated knee with a latch, the feet
// 0.2 m arcs on the shanks. The level-kneed built-in scenario is this
// walker (a test in the scenarios package keeps them equal).
func KneedDemoParams() plant.Params {
	p := plant.DemoParams()
	for i := range p.Legs {
		p.Legs[i] = plant.Leg{Length: 0.45, Mass: 2.2, COMDist: 0.2, Inertia: 0.04, FootRadius: 0.2,
			Shank: &plant.Shank{Length: 0.45, Mass: 0.8, COMDist: 0.18, Inertia: 0.015, Actuated: true, Latch: true}}
	}
	return p
}

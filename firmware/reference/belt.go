package reference

// The belt term: how the reference firmware keeps its place on a treadmill.
//
// On a belt the law's speed estimate v = −LegLength·ω_stance is the speed
// relative to the stance foot, so relative to the belt surface. To stay in
// one place on the belt the walker has to walk exactly as fast as the belt
// runs, which the firmware does not know; and the law's proportional speed
// loop settles below its target anyway (0.78 m/s for 0.8 on level ground,
// 0.42 m/s uphill at 2°). A drift on the belt is therefore the firmware's
// speed error integrated over time, and the rig reports it: the state's
// belt place (protocol.State.BeltPosition, docs/protocol.md section 3.3.1).
// The belt term moves the speed target against the drift:
//
//	target = TargetSpeed − clamp(Gain·p, −MaxShift, MaxShift)
//
// with p the hip's place from the middle of the belt (positive forward).
// Behind the middle the walker aims faster, ahead of it slower. As p is
// the integral of the speed error, the term is the integral action the
// speed loop lacks: it removes the steady drift on any belt speed or
// incline the gait can walk, and the walker settles where the shifted
// target walks at the belt's speed. Off a belt (no belt place in the state,
// or Gain 0) the law is exactly the law without belts.

// BeltGains are the constants of the belt term (see the comment above).
type BeltGains struct {
	// Gain is how much the speed target moves per metre off the middle of
	// the belt, m/s per m (so 1/s).
	Gain float64
	// MaxShift bounds the move of the speed target, m/s.
	MaxShift float64
}

// DefaultBeltGains are tuned for the demo walker on the built-in treadmill
// scenarios:
//
//	Gain      1.0   m/s per m
//	MaxShift  0.6   m/s
//
// Tuned by hand on the treadmill battery of `gaitrig preflight --scenario
// treadmill-steady` (a 2° incline each way moves the demo walker's speed
// by about 0.36 m/s) and on treadmill-ramp, which starts the walker 0.6 m
// behind the middle (our choice; seen while tuning): Gain 0.5 with
// MaxShift 0.5 let the inclined walker drift until the harness rope went
// taut (about 0.9 m from the start); MaxShift 0.8 with Gain 1.5 passed the
// battery but asked so much speed at treadmill-ramp's start that a foot
// lifted off; MaxShift 0.5 was too little downhill. With these values the
// battery passes with the hip at most 0.7 m from the middle
// (TestBeltTermPreflight in package batch) and the 2° uphill belt within
// 0.6 m (TestBeltTermHoldsPlace in package rig).
func DefaultBeltGains() BeltGains {
	return BeltGains{Gain: 1.0, MaxShift: 0.6}
}

// withBelt returns g with TargetSpeed moved by the belt term for reading r
// (g itself when r has no belt place).
func withBelt(g *Gains, r *Reading) Gains {
	out := *g
	if r.OnBelt {
		out.TargetSpeed -= clamp(g.Belt.Gain*r.BeltPos, -g.Belt.MaxShift, g.Belt.MaxShift)
	}
	return out
}

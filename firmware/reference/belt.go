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
// belt place (protocol.State.BeltPosition, docs/protocol.md section 3.3).
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
// scenarios (belt_test.go runs them):
//
//	Gain      1.0   m/s per m
//	MaxShift  0.6   m/s
//
// The speed loop moves the walker's speed by only about half a change of
// its target, so the gain is high enough that a 2° belt incline (which
// shifts the walker's speed by about 0.36 m/s) settles within about half a
// metre of the middle: inside the slack of the scenarios' harness rope,
// which goes taut about 0.9 m from the start. At 1/s the drift still
// settles over a few steps, so the term does not fight the step-to-step
// speed regulation; MaxShift keeps the target inside speeds the demo
// walker walks. Tuned on the preflight battery of treadmill-steady (our
// choice, checked by TestBeltTermPreflight in package batch).
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

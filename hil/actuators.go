package hil

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"gaitrig/bridges/protocol"
)

// ActuatorModel is what stands between the commanded and the applied torque.
type ActuatorModel struct {
	// TorqueLimit is the symmetric torque limit of every joint, N·m.
	// Commands beyond it are clipped and raise torque_saturation. 0 means no
	// limit.
	TorqueLimit float64
	// JointLimits overrides TorqueLimit for single joints, by joint name.
	JointLimits map[string]float64
	// Lag is the time constant of a first-order lag, s; 0 applies the
	// command at once.
	Lag float64
	// Sanity is the magnitude, N·m, beyond which a commanded torque is not a
	// torque but garbage: the whole command is rejected, bad_torque is
	// raised and zero torque applied. 0 means DefaultTorqueSanity.
	Sanity float64
}

// DefaultTorqueSanity is the default sanity bound on a commanded torque:
// 10 kN·m is far beyond any bench walker's motors, so only a corrupted or
// uninitialized value gets there (our choice).
const DefaultTorqueSanity = 1e4

// commandCheck says what the actuator bank made of one command.
type commandCheck struct {
	bad         bool    // a torque was NaN, Inf or beyond the sanity bound
	badJoint    int     // the first bad joint
	badValue    float64 // its value
	saturated   bool    // some torque was clipped
	satJoint    int     // the first clipped joint
	satValue    float64 // its commanded value
	wrongJoints bool    // the command carried another number of torques
}

// actuatorBank holds the torque each motor currently applies.
type actuatorBank struct {
	model   ActuatorModel
	limit   [protocol.MaxJoints]float64 // per joint, resolved from the names
	n       int
	target  [protocol.MaxJoints]float64 // clipped command the lag tends to
	applied [protocol.MaxJoints]float64 // what the plant gets this tick
	alpha   float64                     // lag factor per tick, 1 without lag
}

func newActuatorBank(m ActuatorModel, joints []string, dt float64) (*actuatorBank, error) {
	if m.Sanity <= 0 {
		m.Sanity = DefaultTorqueSanity
	}
	if len(joints) > protocol.MaxJoints {
		return nil, fmt.Errorf("hil: %d joints, a frame carries at most %d", len(joints), protocol.MaxJoints)
	}
	a := &actuatorBank{model: m, n: len(joints), alpha: 1}
	for i := range joints {
		a.limit[i] = m.TorqueLimit
	}
	for name, lim := range m.JointLimits {
		i := slices.Index(joints, name)
		if i < 0 {
			return nil, fmt.Errorf("hil: torque limit for joint %q, but this walker's joints are %s", name, strings.Join(joints, ", "))
		}
		a.limit[i] = lim
	}
	if m.Lag > 0 {
		// Exact discretization of dτ/dt = (τ_cmd − τ)/T for a command held
		// over the tick (zero-order hold).
		a.alpha = 1 - math.Exp(-dt/m.Lag)
	}
	return a, nil
}

// command checks a firmware command and, if it is sound, makes its clipped
// torques the new target. A bad command zeroes target and applied torque at
// once (the drive is disabled, no lag) and leaves the rest to the caller.
func (a *actuatorBank) command(c *protocol.Command) commandCheck {
	var r commandCheck
	r.badJoint, r.satJoint = -1, -1
	if int(c.Joints) != a.n {
		r.wrongJoints = true
		r.bad = true
		a.zero()
		return r
	}
	for i := 0; i < a.n; i++ {
		v := float64(c.Torque[i])
		if math.IsNaN(v) || math.IsInf(v, 0) || math.Abs(v) > a.model.Sanity {
			r.bad, r.badJoint, r.badValue = true, i, v
			a.zero()
			return r
		}
	}
	for i := 0; i < a.n; i++ {
		v := float64(c.Torque[i])
		lim := a.limit[i]
		if lim > 0 && math.Abs(v) > lim {
			if !r.saturated {
				r.saturated, r.satJoint, r.satValue = true, i, v
			}
			v = math.Copysign(lim, v)
		}
		a.target[i] = v
	}
	return r
}

// zero sets target and applied torque to zero (e-stop, rejected command).
func (a *actuatorBank) zero() {
	a.target = [protocol.MaxJoints]float64{}
	a.applied = [protocol.MaxJoints]float64{}
}

// step advances the lag by one tick and returns the torque to apply.
func (a *actuatorBank) step() *[protocol.MaxJoints]float64 {
	if a.alpha == 1 {
		a.applied = a.target
		return &a.applied
	}
	for i := 0; i < a.n; i++ {
		a.applied[i] += a.alpha * (a.target[i] - a.applied[i])
	}
	return &a.applied
}

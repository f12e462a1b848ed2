package batch

import (
	"slices"

	"gaitrig/rig"
	"gaitrig/scenarios"
)

// The belt axes of the margin search: the largest belt perturbation a
// firmware survives on a treadmill scenario. Each adds one pulse of the
// preflight's shape (BeltChecks: PreflightBeltRise up, no hold,
// PreflightBeltRise back, at phase PreflightBeltPhase of step
// PreflightBeltStep) whose size is the axis value, in m/s: positive speeds
// the belt up, negative slows it down. A slow-down larger than the belt's
// speed runs the belt forward for a moment: harder than a lab's pulse,
// and where the search ends by default only if the firmware survives
// everything smaller.
const (
	// DefaultBeltPulseFarMPS is where the belt axes' searches end by
	// default, m/s (our choice: more than twice the natural walking speed
	// of the demo walker; margins.far moves it).
	DefaultBeltPulseFarMPS = 2.0
)

// BeltAxisNames are the belt axes, in search order.
var BeltAxisNames = []string{"belt_speed_up", "belt_slow_down"}

// BeltAxes are the belt perturbation axes: belt_speed_up towards
// +DefaultBeltPulseFarMPS and belt_slow_down towards −DefaultBeltPulseFarMPS.
func BeltAxes() []Axis {
	return []Axis{BeltPulseAxis(BeltAxisNames[0], DefaultBeltPulseFarMPS), BeltPulseAxis(BeltAxisNames[1], -DefaultBeltPulseFarMPS)}
}

// BeltPulseAxis adds one step-timed belt pulse of the value (m/s) to every
// belt of the variant; 0 adds none.
func BeltPulseAxis(name string, far float64) Axis {
	return Axis{Name: name, Unit: "m/s", Safe: 0, Far: far, Apply: func(s *scenarios.Scenario, v float64) {
		if v == 0 {
			return
		}
		for i := range s.Terrain.Segments {
			if b := s.Terrain.Segments[i].Belt; b != nil {
				b.Pulses = append(b.Pulses, scenarios.BeltPulse{AtStep: PreflightBeltStep, Phase: PreflightBeltPhase,
					DeltaMPS: v, RiseS: PreflightBeltRise, FallS: PreflightBeltRise})
			}
		}
	}}
}

// axesForGround drops the belt axes from axes when sc runs on fixed ground
// (a belt pulse without a belt would measure nothing), unless names asks
// for one by name: that is an error saying why.
func axesForGround(sc *scenarios.Scenario, axes []Axis, names []string) ([]Axis, error) {
	if sc.Treadmill() != nil {
		return axes, nil
	}
	out := axes[:0:0]
	for _, a := range axes {
		if !slices.Contains(BeltAxisNames, a.Name) {
			out = append(out, a)
			continue
		}
		if slices.Contains(names, a.Name) {
			return nil, rig.Configf("margins: axis %s needs a treadmill belt; scenario %s has none", a.Name, sc.Name)
		}
	}
	return out, nil
}

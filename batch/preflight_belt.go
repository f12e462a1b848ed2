package batch

import (
	"fmt"

	"gaitrig/scenarios"
)

// The belt perturbations of a treadmill preflight: the belt speeds up (or
// slows down) by PreflightBeltDelta over PreflightBeltRise and comes back
// over the same time, at early stance (phase PreflightBeltPhase) of step
// PreflightBeltStep. The size is that of a moderate gait-lab perturbation,
// well inside what the demo walker recovers from (our choice).
const (
	PreflightBeltDelta = 0.3  // m/s
	PreflightBeltRise  = 0.15 // s
	PreflightBeltStep  = 8
	PreflightBeltPhase = 0.1
)

// BeltChecks are the checks a treadmill scenario adds to the battery (the
// trial's own speed profile is the nominal check): a belt speed-up and a
// slow-down perturbation.
func BeltChecks() []Check {
	pulse := func(delta float64) func(*scenarios.Scenario) {
		return func(s *scenarios.Scenario) {
			for i := range s.Terrain.Segments {
				if b := s.Terrain.Segments[i].Belt; b != nil {
					b.Pulses = append(b.Pulses, scenarios.BeltPulse{AtStep: PreflightBeltStep, Phase: PreflightBeltPhase,
						DeltaMPS: delta, RiseS: PreflightBeltRise, FallS: PreflightBeltRise})
				}
			}
		}
	}
	what := func(word string, delta float64) string {
		return fmt.Sprintf("a belt %s of %+.2g m/s in %.0f ms and back, at early stance of step %d", word, delta, 1000*PreflightBeltRise, PreflightBeltStep)
	}
	return []Check{
		{"belt-speed-up", what("speed-up", PreflightBeltDelta), pulse(PreflightBeltDelta)},
		{"belt-slow-down", what("slow-down", -PreflightBeltDelta), pulse(-PreflightBeltDelta)},
	}
}

// BatteryFor is the battery for a base scenario: Battery, plus BeltChecks
// when the scenario runs on a treadmill belt.
func BatteryFor(base *scenarios.Scenario) []Check {
	checks := Battery()
	if base != nil && base.Treadmill() != nil {
		checks = append(checks, BeltChecks()...)
	}
	return checks
}

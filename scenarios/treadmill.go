package scenarios

import (
	"fmt"
	"math"

	"gaitrig/hil"
	"gaitrig/plant"
)

// Defaults of the treadmill blocks that depend on other values (the
// belt's length, a pulse's rise time); the field comments state them.
const (
	defaultAnchorHeightM = 2.0
	defaultDropM         = 0.2
)

// treadmillDefaults fills the belt and harness fields a file left out and
// places the walker on the belt: start_m defaults to the belt's middle
// when initial.x_m is not given either. StartXM turns it into world x
// when it is used, so a variant with a changed slope still starts on the
// belt.
func (d *decoder) treadmillDefaults(s *Scenario) {
	for i := range s.Terrain.Segments {
		g := &s.Terrain.Segments[i]
		if b := g.Belt; b != nil {
			p := fmt.Sprintf("terrain.segments[%d].belt", i)
			if _, given := d.present[p+".end_margin_m"]; !given {
				b.EndMarginM = hil.DefaultEndMargin
			}
			for k := range b.Pulses {
				if _, given := d.present[fmt.Sprintf("%s.pulses[%d].fall_s", p, k)]; !given {
					b.Pulses[k].FallS = b.Pulses[k].RiseS
				}
			}
			if _, given := d.present["initial.x_m"]; !given && b.StartM == nil {
				mid := 0.5 * g.LengthM
				b.StartM = &mid
			}
		}
	}
	if h := s.Harness; h != nil {
		if _, given := d.present["harness.anchor_height_m"]; !given {
			h.AnchorHeightM = defaultAnchorHeightM
		}
		if _, given := d.present["harness.drop_m"]; !given {
			h.DropM = defaultDropM
		}
		if _, given := d.present["harness.stiffness_npm"]; !given {
			h.StiffnessNPM = hil.DefaultRopeStiffness
		}
		if _, given := d.present["harness.damping_nspm"]; !given {
			h.DampingNSPM = hil.DefaultRopeDamping
		}
	}
}

// beltStartX is the world x of the walker's start on belt segment g, which
// begins at x and has the cosine c of its slope: start_m along the belt,
// or its middle.
func beltStartX(x, c float64, g *Segment) float64 {
	start := 0.5 * g.LengthM
	if g.Belt.StartM != nil {
		start = *g.Belt.StartM
	}
	return x + start*c
}

// StartXM is the forward position the walker starts at, m: the place
// belt.start_m gives on a treadmill belt (it overrides initial.x_m), else
// initial.x_m.
func (s *Scenario) StartXM() float64 {
	x := s.Terrain.StartM[0]
	for i := range s.Terrain.Segments {
		g := &s.Terrain.Segments[i]
		c := math.Cos(g.SlopeRad)
		if g.Belt != nil && g.Belt.StartM != nil {
			return beltStartX(x, c, g)
		}
		x += g.LengthM * c
	}
	return s.Initial.XM
}

// Treadmill returns the loop's belt of the scenario (nil without a belt
// segment): its speed profile and the pulses timed by steps.
func (s *Scenario) Treadmill() *hil.Belt {
	for _, g := range s.Terrain.Segments {
		b := g.Belt
		if b == nil {
			continue
		}
		out := &hil.Belt{EndMargin: b.EndMarginM}
		switch {
		case b.SpeedMPS != nil:
			out.Profile.Points = []plant.BeltPoint{{T: 0, Speed: *b.SpeedMPS}}
		case b.Ramp != nil:
			out.Profile.Points = []plant.BeltPoint{{T: b.Ramp.StartS, Speed: b.Ramp.FromMPS}, {T: b.Ramp.EndS, Speed: b.Ramp.ToMPS}}
		default:
			for _, p := range b.Points {
				out.Profile.Points = append(out.Profile.Points, plant.BeltPoint{T: p.TS, Speed: p.SpeedMPS})
			}
		}
		for _, p := range b.Pulses {
			pu := plant.BeltPulse{Start: p.AtS, Delta: p.DeltaMPS, Rise: p.RiseS, Hold: p.HoldS, Fall: p.FallS}
			if p.AtStep > 0 {
				out.StepPulses = append(out.StepPulses, hil.StepPulse{AtStep: p.AtStep, Phase: p.Phase, Pulse: pu})
				continue
			}
			out.Profile.Pulses = append(out.Profile.Pulses, pu)
		}
		return out
	}
	return nil
}

// FallHarness returns the loop's harness of the scenario, nil without one.
func (s *Scenario) FallHarness() *hil.Harness {
	h := s.Harness
	if h == nil {
		return nil
	}
	return &hil.Harness{Height: h.AnchorHeightM, Drop: h.DropM, Stiffness: h.StiffnessNPM, Damping: h.DampingNSPM}
}

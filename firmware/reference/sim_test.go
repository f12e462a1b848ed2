package reference

import (
	"math"
	"testing"

	"gaitrig/plant"
)

// walkResult is what a closed-loop plant run with noise-free readings gave.
type walkResult struct {
	steps      int
	fell       string
	t          float64
	speeds     []float64 // per step
	lengths    []float64
	peakUtil   float64
	minN       float64
	maxTau     float64
	satTicks   int
	maxTauLate float64
}

// readingOf makes the noise-free Reading of a plant state with foot
// switches that close above 5 N, as the rig's default sensor model does
// (ReadingOf, for the gait finder, closes them on contact mode instead).
func readingOf(m *plant.Model, s *plant.State, c [2]plant.FootContact) Reading {
	var r Reading
	r.Joints = m.NumActuators()
	m.JointState(s, r.Angle[:r.Joints], r.Rate[:r.Joints])
	r.Pitch, r.PitchRate = m.IMU(s)
	for i := 0; i < 2; i++ {
		if c[i].Mode != plant.Free && c[i].Normal > 5 {
			r.Contacts |= 1 << i
		}
	}
	return r
}

func simulate(t *testing.T, p plant.Params, g Gains, init plant.State, seconds float64, dt float64) walkResult {
	t.Helper()
	m, err := plant.New(p, plant.Options{IgnoreScuff: true})
	if err != nil {
		t.Fatal(err)
	}
	s := init
	var in plant.Input
	var res plant.TickResult
	res.Contacts = m.Contacts(&s, &in)
	out := walkResult{minN: math.Inf(1)}
	lastX, lastT := res.Contacts[s.Stance].Point[0], s.T
	tau := make([]float64, m.NumActuators())
	for s.T < seconds {
		r := readingOf(m, &s, res.Contacts)
		Law(&g, &r, tau)
		for i, v := range tau {
			in.Torque[i] = v
			out.maxTau = math.Max(out.maxTau, math.Abs(v))
			if s.T > 3 {
				out.maxTauLate = math.Max(out.maxTauLate, math.Abs(v))
			}
			if math.Abs(v) >= g.TorqueLimit {
				out.satTicks++
			}
		}
		m.Step(&s, &in, dt, &res)
		fc := res.Contacts[s.Stance]
		if fc.Mode != plant.Free {
			out.peakUtil = math.Max(out.peakUtil, fc.Utilization)
			out.minN = math.Min(out.minN, fc.Normal)
		}
		for i := 0; i < res.NumEvents; i++ {
			e := res.Events[i]
			switch e.Kind {
			case plant.HeelStrike:
				x := res.Contacts[e.Foot].Point[0]
				out.steps++
				out.lengths = append(out.lengths, x-lastX)
				out.speeds = append(out.speeds, (x-lastX)/(e.T-lastT))
				lastX, lastT = x, e.T
			case plant.Fall, plant.NonFinite, plant.LiftOff, plant.FrictionLimit:
				if out.fell == "" {
					out.fell = e.Kind.String()
				}
			}
		}
		if res.Stopped {
			break
		}
	}
	out.t = s.T
	return out
}

// The tuned gains walk the demo walker steadily on level ground and on
// ±2° slopes. The numbers checked are our own requirements for the demo
// (at least 30 steps in 30 s, no fall or contact alarm, the last ten steps
// within 2 % of their mean speed), not outside reference values.
func TestDefaultGainsWalkDemo(t *testing.T) {
	tests := []struct {
		name     string
		slopeDeg float64
	}{
		{"level", 0},
		{"uphill 2 degrees", 2},
		{"downhill 2 degrees", -2},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			p := plant.DemoParams()
			p.Terrain.Segments[0].Slope = tc.slopeDeg * math.Pi / 180
			m, err := plant.New(p, plant.Options{IgnoreScuff: true})
			if err != nil {
				t.Fatal(err)
			}
			init, err := m.Stand(0, 0, DemoStart.LegAngles, DemoStart.TorsoAngle, DemoStart.Rates[:]...)
			if err != nil {
				t.Fatal(err)
			}
			r := simulate(t, p, DefaultGains(), init, 30, 1e-3)
			if r.fell != "" {
				t.Fatalf("%s after %d steps at t = %.2f s", r.fell, r.steps, r.t)
			}
			if r.steps < 30 {
				t.Fatalf("only %d steps in 30 s", r.steps)
			}
			last := r.speeds[len(r.speeds)-10:]
			mean, lo, hi := 0.0, math.Inf(1), math.Inf(-1)
			for _, v := range last {
				mean += v / float64(len(last))
				lo, hi = math.Min(lo, v), math.Max(hi, v)
			}
			if (hi-lo)/mean > 0.02 {
				t.Errorf("speed of the last ten steps spreads %.3f … %.3f m/s: not steady", lo, hi)
			}
			t.Logf("%d steps, steady speed %.3f m/s, step length %.3f m, peak friction utilization %.3f, min normal force %.0f N, peak torque %.1f N·m",
				r.steps, mean, r.lengths[len(r.lengths)-1], r.peakUtil, r.minN, r.maxTau)
		})
	}
}

package plant

import (
	"math"
	"testing"
)

// TestFrictionAlarmOnLowFrictionSegment walks the passive arc-foot gait of
// the SciPy fixture (peak required friction 0.262, heel-strike impulse
// ratio 0.284, from passive_step_scipy.json) with the real-time Step at
// 1 kHz onto a terrain segment whose μ_s is below what the gait needs. The
// friction alarm (a friction-limit or impact-slip event) must be raised on
// that segment and on none before it; with μ_s above the need on the same
// segment no friction alarm is raised at all.
func TestFrictionAlarmOnLowFrictionSegment(t *testing.T) {
	var fx scipyFixture
	readFixture(t, "passive_step_scipy.json", &fx)
	need := math.Max(fx.Step.PeakFrictionRatio, fx.Step.ImpulseRatio)
	slope := fx.Params.Slope
	const before = 2.5 // m of ordinary ground ahead of the start
	for _, c := range []struct {
		name  string
		muLow float64
		alarm bool
	}{
		{"slippery patch", 0.2, true},
		{"patch with enough friction", need + 0.05, false},
	} {
		t.Run(c.name, func(t *testing.T) {
			p := fx.Params.plantParams(1)
			p.Terrain = Terrain{
				Start: [2]float64{-10 * math.Cos(slope), -10 * math.Sin(slope)},
				Segments: []Segment{
					{Length: 10 + before, Slope: slope, MuStatic: 1, MuKinetic: 0.8},
					{Length: 50, Slope: slope, MuStatic: c.muLow, MuKinetic: 0.5 * c.muLow},
				},
			}
			m, err := New(p, Options{IgnoreScuff: true, MinStride: fx.HeelStrikeRule.MinAhead})
			if err != nil {
				t.Fatal(err)
			}
			fp := fx.FixedPoint
			s := fixtureState(m, 0, fp.Q, fp.V, fp.Stance)
			var r TickResult
			steps, alarms := 0, 0
			for i := 0; i < 12000 && steps < 10; i++ {
				m.Step(&s, nil, 1e-3, &r)
				for k := 0; k < r.NumEvents; k++ {
					e := r.Events[k]
					switch e.Kind {
					case HeelStrike:
						steps++
					case FrictionLimit, ImpactSlip:
						alarms++
						if e.Segment != 1 {
							t.Fatalf("friction alarm %v on segment %d at t = %.4f, want segment 1", e.Kind, e.Segment, e.T)
						}
						var foot footGeom
						m.footGeometry(&s.Q, &s.V, e.Foot, 1, &foot)
						along := foot.sp.p[0]*math.Cos(slope) + foot.sp.p[1]*math.Sin(slope)
						if along < before-1e-9 {
							t.Fatalf("alarm with the foot %.4f m along the slope, before the patch at %.2f m", along, before)
						}
						t.Logf("%v at t = %.4f s, foot %d, %.3f m along, value %.3f > limit %.3f", e.Kind, e.T, e.Foot, along, e.Value, e.Limit)
					case Scuff:
					default:
						t.Fatalf("unexpected event %v at t = %.4f", e.Kind, e.T)
					}
				}
				if r.Stopped {
					break
				}
			}
			if c.alarm && (alarms == 0 || !r.Stopped) {
				t.Errorf("no friction alarm that stops the run (alarms %d, stopped %v, %d steps)", alarms, r.Stopped, steps)
			}
			if !c.alarm && (alarms != 0 || steps < 10) {
				t.Errorf("alarms %d, steps %d: want 10 steps without a friction alarm", alarms, steps)
			}
		})
	}
}

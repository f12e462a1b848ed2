package plant

import (
	"errors"
	"math"
	"strings"
	"testing"
)

// cornerDisk is a disk (a single rolling leg, no heel strikes) rolling at
// 1 m/s down a slope whose steepness eases at each of the given number of
// concave corners, 0.3 m apart: one touchdown per corner.
func cornerDisk(t *testing.T, corners int) (*Model, State) {
	t.Helper()
	segs := []Segment{}
	for i := 0; i <= corners; i++ {
		segs = append(segs, Segment{Length: 0.3, Slope: -0.24 + 0.02*float64(i), MuStatic: 2, MuKinetic: 2})
	}
	segs[corners].Length = 100
	p := Params{OneLeg: true, Gravity: 9.81,
		Legs:    [2]Leg{{Length: 0.5, Mass: 1, COMDist: 0, Inertia: 0.125, FootRadius: 0.5}},
		Terrain: Terrain{Start: [2]float64{-0.1, 0}, Segments: segs}}
	m, err := New(p, Options{})
	if err != nil {
		t.Fatal(err)
	}
	s, err := m.Stand(0, 0, [2]float64{}, 0, -2)
	if err != nil {
		t.Fatal(err)
	}
	return m, s
}

// TestStepMapFollowsTerrainRegions: the adaptive integrator of StepMap
// takes long steps on a smooth roll. Just after a corner the foot sits on
// the region edge behind it, so a condition for "nearer edge" would start
// the next step at ≤ 0 and a step that passes the following corner would
// miss it. The touchdown times of StepMap must match those of the
// real-time Step (RK4 at 1 kHz, events located to 1e-12 s). This compares
// the two integrators with each other; no outside value is involved.
func TestStepMapFollowsTerrainRegions(t *testing.T) {
	const corners = 6
	m, s := cornerDisk(t, corners)
	var want []float64
	rt := s
	var r TickResult
	for i := 0; i < 3000; i++ {
		m.Step(&rt, nil, 1e-3, &r)
		for k := 0; k < r.NumEvents; k++ {
			if r.Events[k].Kind == Touchdown {
				want = append(want, r.Events[k].T)
			}
		}
		if r.Stopped {
			t.Fatalf("real-time run stopped: %v", r.Events[:r.NumEvents])
		}
	}
	if len(want) != corners {
		t.Fatalf("real-time run: %d touchdowns, want %d", len(want), corners)
	}
	res, err := m.StepMap(s, nil, GaitOptions{MaxTime: 3})
	if !errors.Is(err, ErrNoHeelStrike) {
		t.Fatalf("got error %v, want ErrNoHeelStrike (a single leg has no heel strike)", err)
	}
	var got []float64
	for _, e := range res.Events {
		if e.Kind == Touchdown {
			got = append(got, e.T)
		}
	}
	if len(got) != len(want) {
		t.Fatalf("StepMap touchdowns at %v, Step at %v", got, want)
	}
	for i := range got {
		if d := math.Abs(got[i] - want[i]); d > 1e-9 {
			t.Errorf("touchdown %d at %.12f s, Step %.12f s (difference %.3g s)", i+1, got[i], want[i], d)
		}
	}
}

// TestStepMapKeepsEveryEvent: an analysis run may hold more events than
// one TickResult (MaxEvents); StepMap must return all of them, in order.
// This is a bookkeeping check; no physical value is compared.
func TestStepMapKeepsEveryEvent(t *testing.T) {
	const corners = 12
	if corners <= MaxEvents {
		t.Fatalf("the test needs more corners than MaxEvents (%d)", MaxEvents)
	}
	m, s := cornerDisk(t, corners)
	res, err := m.StepMap(s, nil, GaitOptions{MaxTime: 5})
	if !errors.Is(err, ErrNoHeelStrike) {
		t.Fatalf("got error %v, want ErrNoHeelStrike (a single leg has no heel strike)", err)
	}
	touchdowns := 0
	for _, e := range res.Events {
		if e.Kind == Touchdown {
			touchdowns++
			if e.Segment != touchdowns {
				t.Errorf("touchdown %d on segment %d, want %d", touchdowns, e.Segment, touchdowns)
			}
		}
	}
	if touchdowns != corners {
		t.Errorf("%d touchdowns in %d events, want one per corner (%d)", touchdowns, len(res.Events), corners)
	}
}

// TestStepMapNamesTheStoppingEvent: when the heel-strike impulse leaves the
// friction cone and slips are not continued, the step ends at an impact
// slip, and the error must say so (the impact adds its own heel-strike
// record after the slip). The friction coefficient lies between the peak
// stance friction ratio and the heel-strike impulse ratio of the SciPy
// reference step (testdata/reference/passive_step_scipy.json), so nothing
// else can stop the step first.
func TestStepMapNamesTheStoppingEvent(t *testing.T) {
	var fx scipyFixture
	readFixture(t, "passive_step_scipy.json", &fx)
	mu := 0.5 * (fx.Step.PeakFrictionRatio + fx.Step.ImpulseRatio)
	if !(fx.Step.PeakFrictionRatio < mu && mu < fx.Step.ImpulseRatio) {
		t.Fatalf("fixture: peak friction %g, impulse ratio %g leave no room between them", fx.Step.PeakFrictionRatio, fx.Step.ImpulseRatio)
	}
	m, err := New(fx.Params.plantParams(mu), Options{IgnoreScuff: true, MinStride: fx.HeelStrikeRule.MinAhead})
	if err != nil {
		t.Fatal(err)
	}
	s := fixtureState(m, fx.Initial.T, fx.Initial.Q, fx.Initial.V, fx.Initial.Stance)
	res, err := m.StepMap(s, nil, GaitOptions{})
	if !errors.Is(err, ErrNoHeelStrike) {
		t.Fatalf("got error %v, want ErrNoHeelStrike", err)
	}
	if !strings.Contains(err.Error(), ImpactSlip.String()) {
		t.Errorf("error %q does not name the %s that stopped the step", err, ImpactSlip)
	}
	slip := false
	for _, e := range res.Events {
		slip = slip || e.Kind == ImpactSlip
	}
	if !slip {
		t.Errorf("events %v hold no %s", res.Events, ImpactSlip)
	}
}

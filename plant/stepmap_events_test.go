package plant

import (
	"errors"
	"math"
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

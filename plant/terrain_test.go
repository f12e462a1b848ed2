package plant

import (
	"math"
	"testing"
)

// TestRollingOverConvexVertex: a wheel (one rigid body, centre of mass at
// the arc centre) rolls without slipping from level ground over a convex
// vertex onto a downhill segment. Rolling does no work, so the mechanical
// energy stays constant through the pivot about the vertex (conservation
// law); the contact moves to the next segment without an event.
func TestRollingOverConvexVertex(t *testing.T) {
	p := Params{OneLeg: true, Gravity: 9.81,
		Legs: [2]Leg{{Length: 0.5, Mass: 1, COMDist: 0, Inertia: 0.125, FootRadius: 0.5}},
		Terrain: Terrain{Start: [2]float64{-1, 0}, Segments: []Segment{
			{Length: 2, Slope: 0, MuStatic: 2, MuKinetic: 2},
			{Length: 10, Slope: -0.1, MuStatic: 2, MuKinetic: 2},
		}}}
	m, err := New(p, Options{})
	if err != nil {
		t.Fatal(err)
	}
	s, err := m.Stand(0, 0, [2]float64{}, 0, -3) // 1.5 m/s forward
	if err != nil {
		t.Fatal(err)
	}
	k0, p0 := m.Energy(&s)
	var r TickResult
	drift := 0.0
	sawVertex := false
	for i := 0; i < 1500; i++ {
		m.Step(&s, nil, 1e-3, &r)
		if r.NumEvents > 0 {
			t.Fatalf("t = %.3f: event %v", s.T, r.Events[0].Kind)
		}
		c := r.Contacts[0]
		if c.Point == [2]float64{1, 0} {
			sawVertex = true
		}
		if c.Normal <= 0 || c.Mode != Rolling {
			t.Fatalf("t = %.3f: contact %+v", s.T, c)
		}
		k, pe := m.Energy(&s)
		drift = math.Max(drift, math.Abs(k+pe-k0-p0))
	}
	if r.Contacts[0].Segment != 1 {
		t.Errorf("ended on segment %d, want 1", r.Contacts[0].Segment)
	}
	if !sawVertex {
		t.Errorf("never pivoted about the vertex")
	}
	t.Logf("max energy change %.3g J of kinetic %.3g J", drift, k0)
	if drift > 1e-8*k0 {
		t.Errorf("energy changed by %.3g J over a rolling passage (kinetic %.3g J)", drift, k0)
	}
}

// TestRollingIntoConcaveCorner: a uniform disk (I = ½mR²) rolling on level
// ground meets an uphill segment of slope α. The plastic impact at the new
// contact conserves angular momentum about it, so the centre speed drops by
// (I/(mR²) + cos α)/(I/(mR²) + 1) = (½ + cos α)/1.5 (classical rigid-body
// impact result, derived from angular momentum about the new contact point;
// common practice). The plant reports it as a touchdown on the new segment
// and rolls on up the slope.
func TestRollingIntoConcaveCorner(t *testing.T) {
	const alpha = 0.2
	p := Params{OneLeg: true, Gravity: 9.81,
		Legs: [2]Leg{{Length: 0.5, Mass: 1, COMDist: 0, Inertia: 0.125, FootRadius: 0.5}},
		Terrain: Terrain{Start: [2]float64{-1, 0}, Segments: []Segment{
			{Length: 2, Slope: 0, MuStatic: 2, MuKinetic: 2},
			{Length: 10, Slope: alpha, MuStatic: 2, MuKinetic: 2},
		}}}
	m, err := New(p, Options{})
	if err != nil {
		t.Fatal(err)
	}
	s, err := m.Stand(0, 0, [2]float64{}, 0, -4) // 2 m/s forward
	if err != nil {
		t.Fatal(err)
	}
	var r TickResult
	for i := 0; i < 1000; i++ {
		before := s
		m.Step(&s, nil, 1e-3, &r)
		if r.NumEvents == 0 {
			continue
		}
		e := r.Events[0]
		if e.Kind != Touchdown || e.Segment != 1 || r.NumEvents != 1 || r.Stopped {
			t.Fatalf("events %v stopped %v, want one touchdown on segment 1", r.Events[:r.NumEvents], r.Stopped)
		}
		// Speed just before the impact: the level roll keeps it constant.
		v0 := math.Hypot(before.V[0], before.V[1])
		v1 := math.Hypot(s.V[0], s.V[1])
		// After the impact the disk decelerates up the slope for the rest
		// of the tick: undo that with the rolling deceleration g sin α/1.5.
		v1 += 9.81 * math.Sin(alpha) / 1.5 * (s.T - e.T)
		want := (0.5 + math.Cos(alpha)) / 1.5
		if math.Abs(v1/v0-want) > 1e-9 {
			t.Errorf("speed ratio %.12f, want (½ + cos α)/1.5 = %.12f", v1/v0, want)
		}
		if c := r.Contacts[0]; c.Mode != Rolling || c.Segment != 1 {
			t.Errorf("after the corner: %+v", c)
		}
		return
	}
	t.Fatal("the disk never reached the corner")
}

// TestStandBeforeAHill: a hill further along (up, then down) must not pull
// the contact search away from the ground under the foot. The downhill
// segment's line passes above the foot, so its far vertex has a large
// negative signed distance; the nearest ground is the one under the foot.
func TestStandBeforeAHill(t *testing.T) {
	p := DemoParams()
	p.Terrain = Terrain{Start: [2]float64{-1, 0}, Segments: []Segment{
		{Length: 3, MuStatic: 0.8, MuKinetic: 0.6},
		{Length: 4, Slope: 0.03, MuStatic: 0.8, MuKinetic: 0.6},
		{Length: 4, Slope: -0.03, MuStatic: 0.8, MuKinetic: 0.6},
		{Length: 50, MuStatic: 0.8, MuKinetic: 0.6}}}
	m, err := New(p, Options{IgnoreScuff: true})
	if err != nil {
		t.Fatal(err)
	}
	s, err := m.Stand(0, 0, [2]float64{0.25, -0.25}, -0.1, -0.9, 0.5, 0)
	if err != nil {
		t.Fatalf("cannot stand in front of a hill: %v", err)
	}
	var r TickResult
	in := Input{}
	m.Step(&s, &in, 1e-3, &r)
	if r.Contacts[0].Segment != 0 {
		t.Errorf("stance foot on segment %d, want 0 (the flat ground under it)", r.Contacts[0].Segment)
	}
	if g := r.Contacts[0].Gap; math.Abs(g) > 1e-9 {
		t.Errorf("stance foot gap %.3g m after a tick, want 0", g)
	}
}

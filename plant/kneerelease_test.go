package plant

import (
	"slices"
	"testing"
)

// kneeReleaseWalker is BenchmarkTickKneed's walker with actuated knees:
// standing on its left foot, both knees locked straight and, with latches,
// latched (the swing knee by hand, as the benchmark does, so it stays
// straight). It returns the model, the start and the input index of the left
// knee's torque.
func kneeReleaseWalker(t *testing.T, latch bool) (*Model, State, int) {
	t.Helper()
	p := DemoParams()
	p.Torso = nil
	for i := range p.Legs {
		p.Legs[i] = Leg{Length: 0.45, Mass: 1.8, COMDist: 0.2, Inertia: 0.03, FootRadius: 0.2,
			Shank: &Shank{Length: 0.45, Mass: 1.2, COMDist: 0.25, Inertia: 0.02, Latch: latch, Actuated: true}}
	}
	p.Legs[1].Shank.Length = 0.25
	m, err := New(p, Options{})
	if err != nil {
		t.Fatal(err)
	}
	s, err := m.Stand(0, 0, [2]float64{0.1, -0.2}, 0, 0.3, -0.5)
	if err != nil {
		t.Fatal(err)
	}
	s.KneeLatched[1] = latch
	j := slices.Index(m.JointNames(), "knee_left")
	if j < 0 {
		t.Fatalf("no knee_left among %v", m.JointNames())
	}
	return m, s, j
}

// TestReleaseKneeLatch: a latched stance knee holds against a flexing knee
// torque (its lock torque turns negative, the latch pulls); released, the
// same tick unlocks it at the tick's start with a KneeUnlock event, not a
// KneeBuckle (the knee has a latch and the controller asked), and the knee
// then flexes. Released under an extending torque it stays at its stop,
// which pushes. The physics is the stop-and-latch model of the issue
// (common practice since the first kneed passive walkers).
func TestReleaseKneeLatch(t *testing.T) {
	m, start, j := kneeReleaseWalker(t, true)
	if !start.KneeLatched[0] || !start.KneeLocked[0] {
		t.Fatalf("stance knee locked %v latched %v, want both", start.KneeLocked[0], start.KneeLatched[0])
	}
	var flex Input
	flex.Torque[j] = -10 // N·m, negative flexes the knee

	// Latched: the knee carries the pull.
	s := start
	var r TickResult
	m.Step(&s, &flex, 1e-3, &r)
	if !s.KneeLocked[0] || r.Contacts[0].KneeTorque >= 0 {
		t.Fatalf("latched knee under a flexing torque: locked %v, lock torque %g (want locked, < 0)", s.KneeLocked[0], r.Contacts[0].KneeTorque)
	}
	if r.NumEvents != 0 {
		t.Fatalf("latched knee: events %v", r.Events[:r.NumEvents])
	}

	// Released: the same tick unlocks it.
	s = start
	if !m.ReleaseKneeLatch(&s, 0) {
		t.Fatal("ReleaseKneeLatch of an engaged latch reports false")
	}
	if s.KneeLatched[0] || !s.KneeLocked[0] {
		t.Fatalf("after release: locked %v latched %v, want locked, not latched", s.KneeLocked[0], s.KneeLatched[0])
	}
	m.Step(&s, &flex, 1e-3, &r)
	if s.KneeLocked[0] {
		t.Fatalf("released knee under a flexing torque is still locked (lock torque %g)", r.Contacts[0].KneeTorque)
	}
	if r.NumEvents != 1 || r.Events[0].Kind != KneeUnlock || r.Events[0].Foot != 0 || r.Events[0].T != start.T {
		t.Fatalf("events %v, want one knee_unlock of the left knee at t = %g", r.Events[:r.NumEvents], start.T)
	}
	if r.Events[0].Value > 0 {
		t.Errorf("unlock with lock torque %g, want ≤ 0", r.Events[0].Value)
	}
	if bend := s.Q[2+m.knees[m.kneeOf[0]].shank] - s.Q[2]; bend >= 0 {
		t.Errorf("knee angle %g after the tick, want flexed (< 0)", bend)
	}

	// Released under an extending torque: the stop pushes, the knee stays.
	// (In this posture the stance knee alone would pull a little, −1.4 N·m.)
	var ext Input
	ext.Torque[j] = 10
	s = start
	m.ReleaseKneeLatch(&s, 0)
	m.Step(&s, &ext, 1e-3, &r)
	if !s.KneeLocked[0] || r.Contacts[0].KneeTorque < 0 || r.NumEvents != 0 {
		t.Fatalf("released knee, no torque: locked %v, lock torque %g, events %v (want locked, ≥ 0, none)",
			s.KneeLocked[0], r.Contacts[0].KneeTorque, r.Events[:r.NumEvents])
	}
	if s.KneeLatched[0] {
		t.Error("the latch engaged again without a knee strike or heel strike")
	}
}

// TestReleaseKneeLatchNoOp: ReleaseKneeLatch leaves alone what it cannot
// release and says so: a latch not engaged, a knee without a latch, a leg
// without a knee, and a leg index out of range.
func TestReleaseKneeLatchNoOp(t *testing.T) {
	m, start, _ := kneeReleaseWalker(t, true)
	start.KneeLatched[1] = false
	s := start
	if m.ReleaseKneeLatch(&s, 1) || s != start {
		t.Error("releasing the swing knee's disengaged latch changed something")
	}
	for _, i := range []int{-1, 2} {
		if m.ReleaseKneeLatch(&s, i) || s != start {
			t.Errorf("leg %d: release changed something", i)
		}
	}
	if !m.KneeHasLatch(0) || !m.KneeActuated(1) || m.KneeHasLatch(2) {
		t.Error("KneeHasLatch/KneeActuated wrong on the latched, actuated walker")
	}
	nl, s2, _ := kneeReleaseWalker(t, false)
	s2.KneeLatched[0] = true // as a caller might set it by hand: there is no latch to release
	if nl.ReleaseKneeLatch(&s2, 0) || !s2.KneeLatched[0] || nl.KneeHasLatch(0) {
		t.Error("a knee without a latch was released")
	}
	c, err := New(DemoParams(), Options{})
	if err != nil {
		t.Fatal(err)
	}
	cs := State{KneeLatched: [2]bool{true, true}}
	if c.ReleaseKneeLatch(&cs, 0) || c.KneeHasLatch(0) || c.KneeActuated(0) {
		t.Error("a walker without knees has a knee latch")
	}
}

// TestReleasedStanceKneeIsNoBuckle: a stance knee without a latch that the
// same flexing torque pulls off its stop is a knee_buckle, as before; the
// released latched knee of TestReleaseKneeLatch is not.
func TestReleasedStanceKneeIsNoBuckle(t *testing.T) {
	m, s, j := kneeReleaseWalker(t, false)
	var flex Input
	flex.Torque[j] = -10
	var r TickResult
	m.Step(&s, &flex, 1e-3, &r)
	if r.NumEvents < 1 || r.Events[0].Kind != KneeBuckle || r.Events[0].Foot != 0 {
		t.Fatalf("events %v, want a knee_buckle of the left knee first", r.Events[:r.NumEvents])
	}
}

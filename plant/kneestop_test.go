package plant

import (
	"math"
	"testing"
)

// stopPair is kneedPair's kneed walker with both knee stops at angle stop
// (Shank.StopAngle).
func stopPair(t *testing.T, stop float64) *Model {
	t.Helper()
	k, _ := kneedPair(t)
	p := k.Params()
	for i := range p.Legs {
		sh := *p.Legs[i].Shank
		sh.StopAngle = stop
		p.Legs[i].Shank = &sh
	}
	m, err := New(p, k.Options())
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// TestKneeStopAngle: with the knee stop at −0.1 rad (slightly flexed) a
// walker stands with its knees at the stop, a latched stance knee holds
// that angle through 200 ticks of stance, and a swing knee flexed beyond
// the stop and closing strikes when the knee angle reaches the stop, not
// 0: locked there, knee rate zero, both to 1e-9 (the constraint the knee
// strike imposes; the knee-strike physics is checked with the straight
// stop in kneestrike_test.go).
func TestKneeStopAngle(t *testing.T) {
	const stop = -0.1
	m := stopPair(t, stop)
	s, err := m.Stand(0, 0, [2]float64{0.05, -0.2}, 0, -0.5, 0.3)
	if err != nil {
		t.Fatal(err)
	}
	knee := func(s *State, i int) (float64, float64) {
		return s.Q[4+i] - s.Q[2+i], s.V[4+i] - s.V[2+i]
	}
	for i := 0; i < 2; i++ {
		if a, _ := knee(&s, i); math.Abs(a-stop) > 1e-15 || !s.KneeLocked[i] {
			t.Fatalf("standing %s knee at %g rad (locked %v), want the stop %g", legName(i), a, s.KneeLocked[i], stop)
		}
	}
	s.KneeLatched[1] = true // keep the swing knee at its stop too, as BenchmarkTickKneed does
	var r TickResult
	for tick := 0; tick < 200; tick++ {
		m.Step(&s, nil, 1e-3, &r)
		if r.Stopped {
			t.Fatalf("tick %d stopped: %v", tick, r.Events[:r.NumEvents])
		}
	}
	if a, w := knee(&s, 0); !s.KneeLocked[0] || math.Abs(a-stop) > 1e-9 || math.Abs(w) > 1e-9 {
		t.Fatalf("stance knee after 0.2 s: angle %.12g rad, rate %.3g rad/s, locked %v; want the stop %g, at rest", a, w, s.KneeLocked[0], stop)
	}

	// A swing knee 0.05 rad beyond the stop, closing at 2 rad/s.
	s = swingKneeState(t, m, 0.05-stop, 2)
	if a, _ := knee(&s, 1); math.Abs(a-(stop-0.05)) > 1e-12 {
		t.Fatalf("swing knee starts at %g rad, want %g", a, stop-0.05)
	}
	found := false
	for tick := 0; tick < 100 && !found; tick++ {
		m.Step(&s, nil, 1e-3, &r)
		if r.Stopped {
			t.Fatalf("tick %d stopped: %v", tick, r.Events[:r.NumEvents])
		}
		for j := 0; j < r.NumEvents; j++ {
			if e := r.Events[j]; e.Kind == KneeStrike && e.Foot == 1 {
				found = true
			}
		}
		if a, _ := knee(&s, 1); a > stop+1e-9 {
			t.Fatalf("tick %d: knee angle %.6g rad beyond the stop %g", tick, a, stop)
		}
	}
	if !found {
		t.Fatal("no knee strike within 100 ms")
	}
	if a, w := knee(&s, 1); !s.KneeLocked[1] || math.Abs(a-stop) > 1e-9 || math.Abs(w) > 1e-9 {
		t.Fatalf("after the strike: knee angle %.12g rad, rate %.3g rad/s, locked %v; want the stop %g, rate 0", a, w, s.KneeLocked[1], stop)
	}
}

// TestKneeStopAngleValidation: a stop angle must be finite and less than
// π/2 in magnitude.
func TestKneeStopAngleValidation(t *testing.T) {
	k, _ := kneedPair(t)
	for _, bad := range []float64{math.NaN(), math.Inf(1), math.Pi / 2, -2} {
		p := k.Params()
		sh := *p.Legs[1].Shank
		sh.StopAngle = bad
		p.Legs[1].Shank = &sh
		err := p.Validate()
		pe, ok := err.(*ParamError)
		if !ok || pe.Field != "Legs[1].Shank.StopAngle" {
			t.Errorf("stop angle %g: %v, want a ParamError on Legs[1].Shank.StopAngle", bad, err)
		}
	}
}

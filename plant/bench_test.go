package plant

import (
	"fmt"
	"math"
	"testing"
	"time"
)

// benchWalker builds a walker with arc feet standing on its left foot
// (rolling, contact forces computed every evaluation) with the swing leg
// clear of the ground, so every tick is a plain stance tick.
func benchWalker(b *testing.B, torso bool) (*Model, State) {
	return benchWalkerSub(b, torso, 0)
}

func benchWalkerSub(b *testing.B, torso bool, subSteps int) (*Model, State) {
	return benchWalkerOn(b, torso, subSteps, false)
}

// benchWalkerOn is benchWalkerSub with the ground a belt when belt is set.
func benchWalkerOn(b *testing.B, torso bool, subSteps int, belt bool) (*Model, State) {
	p := DemoParams()
	p.Terrain.Segments[0].Belt = belt
	if !torso {
		p.Torso = nil
	}
	// Rocking on a foot whose arc centre is the hip keeps the walker
	// upright for as long as the benchmark runs; a short swing leg never
	// touches down.
	p.Legs[0].FootRadius = p.Legs[0].Length
	p.Legs[1].Length = 0.5
	p.Legs[1].FootRadius = 0.1
	p.Legs[1].COMDist = 0.2
	if torso {
		// A passive upright torso falls over within a second; hang its
		// centre of mass below the hip instead so it swings for as long as
		// the benchmark runs (same number of links and equations).
		p.Torso.COMDist = -0.3
	}
	m, err := New(p, Options{SubSteps: subSteps})
	if err != nil {
		b.Fatal(err)
	}
	rates := []float64{0.3, -0.5, 0.1}[:m.NumLinks()]
	s, err := m.Stand(0, 0, [2]float64{0.1, -0.2}, 0, rates...)
	if err != nil {
		b.Fatal(err)
	}
	return m, s
}

func benchTick(b *testing.B, torso bool) { benchTickSub(b, torso, 0) }

func benchTickSub(b *testing.B, torso bool, subSteps int) {
	benchTickOn(b, torso, subSteps, nil)
}

// benchTickOn is benchTickSub on a belt moving with the given motion (nil:
// fixed ground). The walker is put on the belt with MoveWithBelt.
func benchTickOn(b *testing.B, torso bool, subSteps int, belt *BeltMotion) {
	m, s := benchWalkerOn(b, torso, subSteps, belt != nil)
	var in Input
	if belt != nil {
		m.MoveWithBelt(&s, belt.Speed)
		in.Belt = *belt
	}
	start := s
	limit := 60.0
	if belt != nil && belt.Accel != 0 {
		// The belt's acceleration tilts the walker's apparent gravity
		// forward: start again before the hanging torso swings over.
		limit = 5
	}
	var r TickResult
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if belt != nil {
			// The speed at the start of each tick follows the acceleration.
			in.Belt.Speed = belt.Speed + belt.Accel*(s.T-start.T)
		}
		m.Step(&s, &in, 1e-3, &r)
		if r.NumEvents > 0 || r.Contacts[0].Mode != Rolling {
			b.Fatalf("tick %d: events %v, stance mode %v", i, r.Events[:r.NumEvents], r.Contacts[0].Mode)
		}
		if s.T > limit {
			s = start
		}
	}
}

// BenchmarkTickCompass: one 1 ms tick of the compass walker with arc feet,
// one foot rolling, contact forces computed, the default RK4 sub-steps
// (DefaultSubSteps), projection.
func BenchmarkTickCompass(b *testing.B) { benchTick(b, false) }

// BenchmarkTickTorso: the same with a torso (5 degrees of freedom).
func BenchmarkTickTorso(b *testing.B) { benchTick(b, true) }

// BenchmarkTickBelt: BenchmarkTickCompass and BenchmarkTickTorso with the
// stance foot rolling on a belt, at a constant 1.2 m/s and accelerating at
// 0.5 m/s² (the belt speed then grows without bound, which the physics
// does not mind). Issue 11 asks for at most 10 % over fixed ground.
func BenchmarkTickBelt(b *testing.B) {
	for _, torso := range []bool{false, true} {
		for _, mo := range []BeltMotion{{Speed: 1.2}, {Speed: 1.2, Accel: 0.5}} {
			name := fmt.Sprintf("torso=%v/accel=%g", torso, mo.Accel)
			b.Run(name, func(b *testing.B) { benchTickOn(b, torso, 0, &mo) })
		}
	}
}

// BenchmarkTickCompassSubSteps: the compass tick with other numbers of RK4
// sub-steps per 1 ms tick (the default is DefaultSubSteps), for choosing
// the trade-off.
func BenchmarkTickCompassSubSteps(b *testing.B) {
	for _, n := range []int{1, 2, 4, 8} {
		b.Run(fmt.Sprintf("substeps=%d", n), func(b *testing.B) { benchTickSub(b, false, n) })
	}
}

// BenchmarkStepMap: one full step-to-step map of the passive arc-foot
// walker of the SciPy fixture with the adaptive integrator (tolerance
// 1e-11), event location included.
func BenchmarkStepMap(b *testing.B) {
	var fx scipyFixture
	readFixture(b, "passive_step_scipy.json", &fx)
	m := fixtureModel(b, &fx)
	fp := fx.FixedPoint
	s := fixtureState(m, 0, fp.Q, fp.V, fp.Stance)
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := m.StepMap(s, nil, GaitOptions{}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkTenStepsSciPyTolerance integrates the same ten passive steps as
// the SciPy timing run of passive_step_scipy.json at its tolerance
// (rtol = atol from the fixture), for the side-by-side speed comparison.
func BenchmarkTenStepsSciPyTolerance(b *testing.B) {
	var fx scipyFixture
	readFixture(b, "passive_step_scipy.json", &fx)
	m := fixtureModel(b, &fx)
	s0 := fixtureState(m, fx.Initial.T, fx.Initial.Q, fx.Initial.V, fx.Initial.Stance)
	o := GaitOptions{Tol: fx.Timing.Rtol}
	b.ReportAllocs()
	b.ResetTimer()
	var last State
	for i := 0; i < b.N; i++ {
		s := s0
		for k := 0; k < fx.Timing.Steps; k++ {
			res, err := m.StepMap(s, nil, o)
			if err != nil {
				b.Fatal(err)
			}
			s = res.After
		}
		last = s
	}
	b.StopTimer()
	b.ReportMetric(fx.Timing.WallTimeS*1e9, "scipy-ns/op")
	if math.Abs(last.T-fx.TenSteps.Steps[9].HeelStrikeTime) > 1e-6 {
		b.Fatalf("ten steps end at %g, SciPy %g", last.T, fx.TenSteps.Steps[9].HeelStrikeTime)
	}
}

// BenchmarkTickBeltOverhead measures the cost of a belt tick against a
// fixed-ground tick on a shared machine: the compass walker of
// BenchmarkTickCompass on fixed ground and on a belt at a constant
// 1.2 m/s is stepped in alternating blocks of 1000 ticks, each block
// timed, so a change in the machine's load hits both alike. It reports
// ns per tick of each and their ratio (belt-ratio; issue 11 asks for at
// most 1.10). Nothing is asserted: speed is measured, not tested.
//
// On a busy machine the sums carry whatever the other processes took
// from each block, which swings the ratio by tens of per cent between
// runs. The fastest block of each kind is the one least disturbed, so the
// benchmark also reports the ratio of the two minima (belt-min-ratio),
// the better estimate of what a tick costs when it has the core.
func BenchmarkTickBeltOverhead(b *testing.B) {
	mf, sf := benchWalkerOn(b, false, 0, false)
	mb, sb := benchWalkerOn(b, false, 0, true)
	mb.MoveWithBelt(&sb, 1.2)
	f0, b0 := sf, sb
	var inF, inB Input
	inB.Belt.Speed = 1.2
	var r TickResult
	var tf, tb time.Duration
	minF, minB := time.Duration(math.MaxInt64), time.Duration(math.MaxInt64)
	const block = 1000
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		t0 := time.Now()
		for k := 0; k < block; k++ {
			mf.Step(&sf, &inF, 1e-3, &r)
		}
		t1 := time.Now()
		for k := 0; k < block; k++ {
			mb.Step(&sb, &inB, 1e-3, &r)
		}
		db, df := time.Since(t1), t1.Sub(t0)
		tb += db
		tf += df
		minB, minF = min(minB, db), min(minF, df)
		if r.NumEvents > 0 || r.Contacts[0].Mode != Rolling {
			b.Fatalf("belt tick: events %v, stance mode %v", r.Events[:r.NumEvents], r.Contacts[0].Mode)
		}
		if sf.T > 60 {
			sf, sb = f0, b0
		}
	}
	n := float64(b.N) * block
	b.ReportMetric(float64(tf.Nanoseconds())/n, "fixed-ns/tick")
	b.ReportMetric(float64(tb.Nanoseconds())/n, "belt-ns/tick")
	b.ReportMetric(float64(tb)/float64(tf), "belt-ratio")
	b.ReportMetric(float64(minB)/float64(minF), "belt-min-ratio")
}

// BenchmarkTickKneed: one 1 ms tick of a kneed walker (thighs, shanks,
// arc feet on the shanks, 6 degrees of freedom) standing on its left foot
// with both knees latched: one foot rolling and two knee rows in the dense
// solve, the default RK4 sub-steps, projection. The right shank is short so the
// swing foot stays clear; the walker restarts every 0.2 s, well before it
// could tip over.
func BenchmarkTickKneed(b *testing.B) {
	p := DemoParams()
	p.Torso = nil
	for i := range p.Legs {
		p.Legs[i] = Leg{Length: 0.45, Mass: 1.8, COMDist: 0.2, Inertia: 0.03, FootRadius: 0.2,
			Shank: &Shank{Length: 0.45, Mass: 1.2, COMDist: 0.25, Inertia: 0.02, Latch: true}}
	}
	p.Legs[1].Shank.Length = 0.25
	m, err := New(p, Options{})
	if err != nil {
		b.Fatal(err)
	}
	start, err := m.Stand(0, 0, [2]float64{0.1, -0.2}, 0, 0.3, -0.5)
	if err != nil {
		b.Fatal(err)
	}
	start.KneeLatched[1] = true
	s := start
	var r TickResult
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		m.Step(&s, nil, 1e-3, &r)
		if r.NumEvents > 0 || r.Contacts[0].Mode != Rolling {
			b.Fatalf("tick %d: events %v, stance mode %v", i, r.Events[:r.NumEvents], r.Contacts[0].Mode)
		}
		if s.T > 0.2 {
			s = start
		}
	}
}

// A passive step of a walker without knees allocates only its result's
// event list (and its growth), not a copy of the evaluation per accepted
// step: the map runs thousands of times in a gait search or a margin
// sweep. It allocated 24 times per map when every sample was copied for
// an observer that only a kneed walker needs.
func TestStepMapAllocations(t *testing.T) {
	var fx scipyFixture
	readFixture(t, "passive_step_scipy.json", &fx)
	m := fixtureModel(t, &fx)
	fp := fx.FixedPoint
	s := fixtureState(m, 0, fp.Q, fp.V, fp.Stance)
	allocs := testing.AllocsPerRun(20, func() {
		if _, err := m.StepMap(s, nil, GaitOptions{}); err != nil {
			t.Fatal(err)
		}
	})
	if allocs > 6 {
		t.Errorf("%.0f allocations per step map, want at most 6 (the event list)", allocs)
	}
}

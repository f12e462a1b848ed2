package batch

import (
	"context"
	"math"
	"sync"
	"testing"

	"gaitrig/hil"
	"gaitrig/record"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

func TestMarginsOfTheBuiltInController(t *testing.T) {
	if testing.Short() {
		t.Skip("many lockstep walks")
	}
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	res, err := Margins{Dir: t.TempDir(), Jobs: 2}.Run(context.Background(), sc, []Axis{FrictionAxis(), PushAxis("push_forward", 1, 40, 5)})
	if err != nil {
		t.Fatal(err)
	}
	for _, am := range res {
		t.Logf("%s: limit %g %s (±%g) reached %v not monotone %v; pass %+v fail %+v", am.Axis, am.Limit, am.Unit, am.Tolerance, am.Reached, am.NotMonotone, am.LastPass, am.FirstFail)
		if am.Error != "" {
			t.Errorf("%s: %s", am.Axis, am.Error)
			continue
		}
		if am.Axis == "friction" && (math.Abs(am.MuStaticMin-0.8*am.Limit) > 1e-12 || math.Abs(am.FrictionRatio*am.Limit-1) > 1e-12) {
			t.Errorf("friction: μ_s,min %g and ratio %g for the fraction %g of μ_s 0.8", am.MuStaticMin, am.FrictionRatio, am.Limit)
		}
		if am.Reached {
			// The two deciding runs are real run folders that say so.
			p, err := record.Open(am.LastPass.Dir)
			if err != nil || p.Summary.Outcome != record.Pass {
				t.Errorf("%s: last pass %s: %v %v", am.Axis, am.LastPass.Dir, err, p)
			}
			f, err := record.Open(am.FirstFail.Dir)
			if err != nil || f.Summary.Outcome == record.Pass {
				t.Errorf("%s: first fail %s: %v", am.Axis, am.FirstFail.Dir, err)
			}
			if w := am.FirstFail.Value - am.LastPass.Value; w*w > 0.02*0.02*(am.Far-am.Safe)*(am.Far-am.Safe) {
				t.Errorf("%s: bracket %g wider than 2 %% of the range", am.Axis, w)
			}
		}
	}
}

// TestAWeakerFirmwareHasSmallerMargins compares the reference law with a
// variant of it with less swing-leg damping (swing_kd 3 against the
// default 10, reference.DefaultGains; set through controller.settings,
// reference.GainsFromSettings): the swing leg arrives less controlled, and
// the search must find that the walker needs more friction and survives a
// smaller backward push late in the stance.
//
// Why not a forward push: a push is one tick long (issue 10), so a push
// of tens of N·s is a force of tens of kN for 1 ms, against which gravity
// and the torques (≤ 60 N·m) do not count. Whether the stance foot keeps
// its grip during that tick is set by the push's direction relative to the
// stance leg and the mass distribution, that is by the posture at the push
// instant, before the firmware has read a single state after it. On the
// demo walker the forward pushes at early and mid stance fail exactly
// there (measured: nominal, friction_limit trip in the push tick at
// 27.5 N·s early and 29.5 N·s mid; swing_kd 3, peak utilization above the
// 0.9 criterion from 32 N·s), and the weaker firmware's slightly
// different posture gives it a little more grip (31.5 and 31 N·s against
// 27 and 29). That is the plant, not the search: the grids passed below
// the first failure and the brackets closed to 0.5 N·s without a pass
// beyond. The backward late push fails steps after the push, when the
// firmware has to recover, which is what this comparison is about.
func TestAWeakerFirmwareHasSmallerMargins(t *testing.T) {
	if testing.Short() {
		t.Skip("many lockstep walks")
	}
	nominal, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	weak, err := Derive(nominal, "level-demo-weak", "swing-leg damping lowered from 10 to 3", func(s *scenarios.Scenario) {
		s.Controller.Settings = map[string]float64{"swing_kd": 3}
	})
	if err != nil {
		t.Fatal(err)
	}
	limits := func(sc *scenarios.Scenario) (friction, push AxisMargin) {
		res, err := Margins{Dir: t.TempDir(), Jobs: 2}.Search(context.Background(), sc, []string{"friction", "push_backward_late"})
		if err != nil {
			t.Fatal(err)
		}
		for _, am := range res {
			if am.Error != "" {
				t.Fatalf("%s %s: %s", sc.Name, am.Axis, am.Error)
			}
		}
		return res[0], res[1]
	}
	fn, pn := limits(nominal)
	fw, pw := limits(weak)
	t.Logf("friction fraction: nominal %.4g, weak %.4g; backward push late: nominal %.4g N·s (reached %v), weak %.4g N·s", fn.Limit, fw.Limit, pn.Limit, pn.Reached, pw.Limit)
	// The friction limit is the lowest fraction of μ_s that passes, so a
	// smaller margin is a higher fraction; the difference must exceed the
	// search's resolution (2 % of the range 1 … 0.05).
	if !(fw.Limit-fn.Limit > 0.02*0.95) {
		t.Errorf("the weaker firmware walks down to %.4g × μ_s, the nominal one to %.4g: want a higher limit (less margin)", fw.Limit, fn.Limit)
	}
	// A push limit not reached means "at least the end of the range".
	if !pw.Reached || !(pn.Limit-pw.Limit > 0.02*40) {
		t.Errorf("the weaker firmware survives %.4g N·s backward late in the stance, the nominal one %.4g: want less", pw.Limit, pn.Limit)
	}
}

func TestDefaultAxesAreTheScenarioVocabulary(t *testing.T) {
	axes := DefaultAxes(Nominal{StrikeS: 5, PeriodS: 0.5})
	if len(axes) != len(scenarios.MarginAxes) {
		t.Fatalf("%d axes, scenarios.MarginAxes has %d", len(axes), len(scenarios.MarginAxes))
	}
	for i, a := range axes {
		if a.Name != scenarios.MarginAxes[i] {
			t.Errorf("axis %d is %q, scenarios.MarginAxes says %q", i, a.Name, scenarios.MarginAxes[i])
		}
	}
	if _, err := SelectAxes(axes, []string{"wind"}); err == nil {
		t.Error("an unknown axis was accepted")
	}
}

// TestAxesChangeWhatTheySay applies each axis at its far end to a copy of
// the demo scenario and checks the field it names changed as its doc says.
func TestAxesChangeWhatTheySay(t *testing.T) {
	base, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	axes, _ := SelectAxes(DefaultAxes(Nominal{StrikeS: 5, PeriodS: 0.5}), nil)
	for _, a := range axes {
		v, err := Derive(base, "x-"+a.Name, a.Name, func(s *scenarios.Scenario) { a.Apply(s, a.Far) })
		if err != nil {
			t.Fatalf("%s: %v", a.Name, err)
		}
		switch a.Name {
		case "friction":
			if got := v.Terrain.Segments[0].MuStatic; got != 0.05*base.Terrain.Segments[0].MuStatic {
				t.Errorf("friction: μ_s %g", got)
			}
		case "push_forward_mid":
			if f := v.Faults[len(v.Faults)-1]; f.AtS != 5.25 || f.ImpulseNS[0] != a.Far {
				t.Errorf("push: %+v", f)
			}
		case "push_backward_late":
			if f := v.Faults[len(v.Faults)-1]; f.AtS != 5+0.9*0.5 || f.ImpulseNS[0] != -a.Far {
				t.Errorf("push: %+v", f)
			}
		case "encoder_counts":
			if v.Sensors.EncoderCountsPerRev != 16 || a.Unit != "counts/rev" {
				t.Errorf("encoder: %d counts", v.Sensors.EncoderCountsPerRev)
			}
		case "mass_plus":
			if v.Plant.HipMassKG != 1.5*base.Plant.HipMassKG || v.Plant.Torso.MassKG != 1.5*base.Plant.Torso.MassKG || base.Plant.Torso.MassKG != 15 {
				t.Errorf("mass: hip %g torso %g (base torso %g)", v.Plant.HipMassKG, v.Plant.Torso.MassKG, base.Plant.Torso.MassKG)
			}
		case "leg_length_minus":
			if v.Plant.Legs.LengthM != 0.7*base.Plant.Legs.LengthM {
				t.Errorf("leg length %g", v.Plant.Legs.LengthM)
			}
		case "torque_fraction":
			if v.Actuators.TorqueLimitNM != 0.05*base.Actuators.TorqueLimitNM {
				t.Errorf("torque limit %g", v.Actuators.TorqueLimitNM)
			}
		}
	}
}

// TestRequiredMinimaAreJudgedInTheAxisDirection checks the gate's sums by
// hand: a friction ratio is the inverse of the fraction found, a push or a
// latency must reach the minimum, a downhill slope must reach minus it.
func TestRequiredMinimaAreJudgedInTheAxisDirection(t *testing.T) {
	m := scenarios.Margins{MinFrictionRatio: 2, MinPushNS: 30, MinAddedLatencyMS: 20, MinSlopeDeg: 5}
	for _, tc := range []struct {
		axis             string
		safe, far, limit float64
		meets            bool
		shortfall        float64
	}{
		{"friction", 1, 0.05, 0.31, true, 0},       // walks on 0.31 μ_s: ratio 3.2 ≥ 2
		{"friction", 1, 0.05, 0.625, false, 0.125}, // ratio 1.6 < 2: fraction 0.625 against 0.5
		{"push_forward_mid", 0, 40, 27, false, 3},
		{"push_backward_late", 0, 40, 40, true, 0},
		{"added_latency", 0, 40, 37, true, 0},
		{"slope_up", 0, 10, 2.75, false, 2.25},
		{"slope_down", 0, -10, -10, true, 0},
		{"noise_multiple", 1, 50, 2, true, 0}, // no minimum set
	} {
		am := AxisMargin{Axis: tc.axis, Safe: tc.safe, Far: tc.far, Limit: tc.limit}
		am.judge(Required(m, tc.axis))
		if am.Meets != tc.meets || math.Abs(am.Shortfall-tc.shortfall) > 1e-12 {
			t.Errorf("%s limit %g: meets %v shortfall %g, want %v %g", tc.axis, tc.limit, am.Meets, am.Shortfall, tc.meets, tc.shortfall)
		}
	}
}

// TestMarginsWithSeedsNeedEverySeedToPass counts the runs a seeded search
// makes (a Runner that only counts and fails seed 2 above a value) and
// checks that one failing seed fails the value.
func TestMarginsWithSeedsNeedEverySeedToPass(t *testing.T) {
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	var mu sync.Mutex
	calls := 0
	runner := func(_ context.Context, s *scenarios.Scenario, o rig.Options) (rig.Result, error) {
		mu.Lock()
		calls++
		mu.Unlock()
		out := record.Pass
		// The latency axis: fail seed 2 from 10 ms on.
		for _, f := range s.Faults {
			if f.Kind == "latency" && f.FixedMS >= 10 && s.Sensors.Seed == sc.Sensors.Seed+1 {
				out = record.Fail
			}
		}
		return rig.Result{Dir: o.RunDir, Summary: record.Summary{Outcome: out, Steps: 30}}, nil
	}
	axes, _ := SelectAxes(DefaultAxes(Nominal{}), []string{"added_latency"})
	res, err := Margins{Dir: t.TempDir(), Seeds: 3, Runner: runner}.Run(context.Background(), sc, axes)
	if err != nil {
		t.Fatal(err)
	}
	a := res[0]
	if a.Limit >= 10 || a.FirstFail.Value < 10 || a.LastPass.Value >= 10 {
		t.Errorf("limit %g (pass %g, fail %g): want just under 10 ms", a.Limit, a.LastPass.Value, a.FirstFail.Value)
	}
	if want := 3 * (DefaultMarginGrid + len(a.Bisection)); calls != want {
		t.Errorf("%d runs, want %d (3 seeds × (grid + bisection))", calls, want)
	}
}

// TestMarginsFlagAPassBeyondTheLimit feeds the search a firmware (a Runner
// that judges by the latency alone) that fails between 10 and 20 ms and
// passes again above: the limit is the first failure's edge and the axis
// is flagged not monotone.
func TestMarginsFlagAPassBeyondTheLimit(t *testing.T) {
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	runner := func(_ context.Context, s *scenarios.Scenario, o rig.Options) (rig.Result, error) {
		out := record.Pass
		for _, f := range s.Faults {
			if f.Kind == "latency" && f.FixedMS >= 10 && f.FixedMS < 20 {
				out = record.Fail
			}
		}
		return rig.Result{Dir: o.RunDir, Summary: record.Summary{Outcome: out, Steps: 30}}, nil
	}
	axes, _ := SelectAxes(DefaultAxes(Nominal{}), []string{"added_latency"})
	res, err := Margins{Dir: t.TempDir(), Runner: runner}.Run(context.Background(), sc, axes)
	if err != nil {
		t.Fatal(err)
	}
	a := res[0]
	// Grid 0, 8, 16, 24, 32, 40 ms: 16 fails first, 24 … 40 pass again.
	if !a.NotMonotone || a.Limit < 9.2 || a.Limit >= 10 || a.FirstFail.Value < 10 || a.Tolerance > 0.02*40 {
		t.Errorf("limit %g ± %g, not monotone %v: want just under 10 ms, flagged", a.Limit, a.Tolerance, a.NotMonotone)
	}
}

// TestFarEndsAreTheDocumentedOnes keeps DefaultAxes and the margins.far
// comment of scenarios.Margins (docs/scenarios.md) in step, and checks
// that a scenario's far end replaces the default and one on the wrong
// side of the start is refused.
func TestFarEndsAreTheDocumentedOnes(t *testing.T) {
	doc := map[string]float64{"friction": 0.05, "added_latency": 40, "slope_up": 10, "slope_down": -10, "noise_multiple": 50,
		"encoder_counts": 16, "torque_fraction": 0.05, "mass_plus": 50, "mass_minus": -50, "leg_length_plus": 30, "leg_length_minus": -30,
		"belt_speed_up": 2, "belt_slow_down": -2}
	for _, a := range DefaultAxes(Nominal{}) {
		want, ok := doc[a.Name]
		if !ok {
			want = 40 // every push axis
		}
		if a.Far != want {
			t.Errorf("%s: far %g, the page says %g", a.Name, a.Far, want)
		}
	}
	base, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	runner := func(_ context.Context, s *scenarios.Scenario, o rig.Options) (rig.Result, error) {
		steps := []hil.StepInfo{}
		for i := 1; i <= 12; i++ {
			steps = append(steps, hil.StepInfo{Index: i, DurationS: 0.5, SimTimeS: 0.5 * float64(i)})
		}
		if o.OnStep != nil {
			for _, st := range steps {
				o.OnStep(st)
			}
		}
		return rig.Result{Dir: o.RunDir, Summary: record.Summary{Outcome: record.Pass, Steps: 12}}, nil
	}
	sc, _ := Derive(base, "far", "far end of added_latency 5 ms", func(s *scenarios.Scenario) { s.Margins.Far = map[string]float64{"added_latency": 5} })
	res, err := Margins{Dir: t.TempDir(), Runner: runner}.Search(context.Background(), sc, []string{"added_latency"})
	if err != nil || res[0].Far != 5 || res[0].Limit != 5 {
		t.Errorf("far 5 ms: %+v, %v", res, err)
	}
	bad, _ := Derive(base, "far-bad", "far end of slope_down uphill", func(s *scenarios.Scenario) { s.Margins.Far = map[string]float64{"slope_down": 3} })
	if _, err := (Margins{Dir: t.TempDir(), Runner: runner}).Search(context.Background(), bad, []string{"slope_down"}); err == nil {
		t.Error("a downhill axis ending uphill was accepted")
	}
}

// TestEncoderAxisIsInCountsPerRevolution: the encoder axis starts at the
// scenario's own resolution, runs whole counts per revolution on a
// geometric grid and reports its limit in counts per revolution. The
// firmware here (a Runner) fails below 100 counts: the limit is the
// coarsest passing count found, within the tolerance's ratio of 100.
func TestEncoderAxisIsInCountsPerRevolution(t *testing.T) {
	base, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	sc, _ := Derive(base, "enc", "a 10-bit encoder", func(s *scenarios.Scenario) { s.Sensors.EncoderCountsPerRev = 1024 })
	var mu sync.Mutex
	var seen []int
	runner := func(_ context.Context, s *scenarios.Scenario, o rig.Options) (rig.Result, error) {
		n := s.Sensors.EncoderCountsPerRev
		mu.Lock()
		seen = append(seen, n)
		mu.Unlock()
		steps := []hil.StepInfo{}
		for i := 1; i <= 12; i++ {
			steps = append(steps, hil.StepInfo{Index: i, DurationS: 0.5, SimTimeS: 0.5 * float64(i)})
		}
		if o.OnStep != nil {
			for _, st := range steps {
				o.OnStep(st)
			}
		}
		out := record.Pass
		if n < 100 {
			out = record.Fail
		}
		return rig.Result{Dir: o.RunDir, Summary: record.Summary{Outcome: out, Steps: 12}}, nil
	}
	res, err := Margins{Dir: t.TempDir(), Runner: runner}.Search(context.Background(), sc, []string{"encoder_counts"})
	if err != nil {
		t.Fatal(err)
	}
	a := res[0]
	t.Logf("grid %v; limit %g %s ± %g; runs %v", a.Grid, a.Limit, a.Unit, a.Tolerance, seen)
	if a.Unit != "counts/rev" || a.Safe != 1024 || a.Far != 16 || a.Grid[0].Value != 1024 {
		t.Errorf("axis %s from %g to %g, first grid point %g: want counts/rev from the scenario's 1024 to 16", a.Unit, a.Safe, a.Far, a.Grid[0].Value)
	}
	// ln(1024/16) = 6 ln 2; 2 % of it is a ratio of 2^0.12 ≈ 1.087.
	if a.Limit < 100 || a.Limit > 100*math.Exp2(0.12) || a.FirstFail.Value >= 100 || a.Limit != math.Round(a.Limit) {
		t.Errorf("limit %g counts/rev (first fail %g): want a whole count from 100 to %.1f", a.Limit, a.FirstFail.Value, 100*math.Exp2(0.12))
	}
	for _, n := range seen[1:] { // the nominal run keeps the scenario's 1024
		if n < 16 || n > 1024 {
			t.Errorf("a run with %d counts/rev, outside 16 … 1024", n)
		}
	}
}

// TestModelMismatchKeepsTheShape checks the mass and leg-length axes on a
// walker whose legs differ (per-leg overrides of every field) against the
// scaling laws of a rigid body, computed here from the plant parameters
// the variant builds: scaling every mass by k at fixed geometry scales each
// moment of inertia by k; scaling every length by s at fixed mass scales it
// by s². So the dimensionless radius of gyration I/(m L²) of each leg
// stays as it was, and each leg's lengths keep their ratios.
func TestModelMismatchKeepsTheShape(t *testing.T) {
	base, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	f := func(v float64) *float64 { return &v }
	odd, err := Derive(base, "odd-legs", "a left leg unlike the right", func(s *scenarios.Scenario) {
		s.Plant.Legs.ArcOffsetM = 0.01
		s.Plant.Legs.Left = &scenarios.LegOverride{LengthM: f(0.85), MassKG: f(3.6), COMM: f(0.3), InertiaKGM2: f(0.21), FootRadiusM: f(0.25), ArcOffsetM: f(0.02)}
		s.Plant.Legs.Right = &scenarios.LegOverride{InertiaKGM2: f(0.12)}
	})
	if err != nil {
		t.Fatal(err)
	}
	bp, err := odd.PlantParams()
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		axis   Axis
		v      float64
		mass   float64 // expected factor on every mass
		length float64 // expected factor on every length
	}{
		{MassAxis("mass_plus", 50), 40, 1.4, 1},
		{MassAxis("mass_minus", -50), -30, 0.7, 1},
		{LegLengthAxis("leg_length_plus", 30), 20, 1, 1.2},
		{LegLengthAxis("leg_length_minus", -30), -25, 1, 0.75},
	} {
		v, err := Derive(odd, "x-"+tc.axis.Name, tc.axis.Name, func(s *scenarios.Scenario) { tc.axis.Apply(s, tc.v) })
		if err != nil {
			t.Fatalf("%s: %v", tc.axis.Name, err)
		}
		vp, err := v.PlantParams()
		if err != nil {
			t.Fatalf("%s: %v", tc.axis.Name, err)
		}
		for i := range vp.Legs {
			b, g := bp.Legs[i], vp.Legs[i]
			near := func(what string, got, want float64) {
				if math.Abs(got-want) > 1e-12*math.Max(1, math.Abs(want)) {
					t.Errorf("%s %g, leg %d: %s %g, want %g", tc.axis.Name, tc.v, i, what, got, want)
				}
			}
			near("mass", g.Mass, tc.mass*b.Mass)
			near("length", g.Length, tc.length*b.Length)
			near("centre of mass", g.COMDist, tc.length*b.COMDist)
			near("foot radius", g.FootRadius, tc.length*b.FootRadius)
			near("arc offset", g.ArcOffset, tc.length*b.ArcOffset)
			near("I/(m L²)", g.Inertia/(g.Mass*g.Length*g.Length), b.Inertia/(b.Mass*b.Length*b.Length))
		}
		if odd.Plant.Legs.Left.InertiaKGM2 == nil || *odd.Plant.Legs.Left.InertiaKGM2 != 0.21 {
			t.Errorf("%s changed the scenario it was derived from", tc.axis.Name)
		}
	}
}

// TestModelMismatchScalesShanks is TestModelMismatchKeepsTheShape for a
// kneed walker: the shank of each leg (shared block and a per-leg
// override) follows the same rigid-body scaling laws as the thigh.
func TestModelMismatchScalesShanks(t *testing.T) {
	base, err := scenarios.LoadBuiltin("level-kneed")
	if err != nil {
		t.Fatal(err)
	}
	if base.Plant.Legs.Shank == nil {
		t.Fatal("level-kneed has no shank block")
	}
	f := func(v float64) *float64 { return &v }
	odd, err := Derive(base, "odd-shank", "a left shank unlike the right", func(s *scenarios.Scenario) {
		s.Plant.Legs.Left = &scenarios.LegOverride{Shank: &scenarios.ShankOverride{MassKG: f(1.7), COMM: f(0.2), InertiaKGM2: f(0.03)}}
	})
	if err != nil {
		t.Fatal(err)
	}
	bp, err := odd.PlantParams()
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		axis         Axis
		v            float64
		mass, length float64
	}{
		{MassAxis("mass_plus", 50), 40, 1.4, 1},
		{LegLengthAxis("leg_length_minus", -30), -25, 1, 0.75},
	} {
		v, err := Derive(odd, "x-"+tc.axis.Name, tc.axis.Name, func(s *scenarios.Scenario) { tc.axis.Apply(s, tc.v) })
		if err != nil {
			t.Fatalf("%s: %v", tc.axis.Name, err)
		}
		vp, err := v.PlantParams()
		if err != nil {
			t.Fatalf("%s: %v", tc.axis.Name, err)
		}
		for i := range vp.Legs {
			b, g := bp.Legs[i].Shank, vp.Legs[i].Shank
			if b == nil || g == nil {
				t.Fatalf("%s: leg %d lost its shank", tc.axis.Name, i)
			}
			near := func(what string, got, want float64) {
				if math.Abs(got-want) > 1e-12*math.Max(1, math.Abs(want)) {
					t.Errorf("%s %g, shank %d: %s %g, want %g", tc.axis.Name, tc.v, i, what, got, want)
				}
			}
			near("mass", g.Mass, tc.mass*b.Mass)
			near("length", g.Length, tc.length*b.Length)
			near("centre of mass", g.COMDist, tc.length*b.COMDist)
			near("I/(m L²)", g.Inertia/(g.Mass*g.Length*g.Length), b.Inertia/(b.Mass*b.Length*b.Length))
		}
		if *odd.Plant.Legs.Left.Shank.MassKG != 1.7 || odd.Plant.Legs.Shank.MassKG != base.Plant.Legs.Shank.MassKG {
			t.Errorf("%s changed the scenario it was derived from", tc.axis.Name)
		}
	}
}

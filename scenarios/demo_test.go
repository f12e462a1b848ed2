package scenarios_test

import (
	"reflect"
	"testing"

	"gaitrig/firmware/reference"
	"gaitrig/plant"
	"gaitrig/scenarios"
)

// TestLevelDemoIsTheDemoWalker keeps the level-demo scenario equal to the
// demo walker the plant defines and the start the reference gains are tuned
// for, so the demo parameters live in one place and a retune of one shows
// up here.
func TestLevelDemoIsTheDemoWalker(t *testing.T) {
	s, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	p, err := s.PlantParams()
	if err != nil {
		t.Fatal(err)
	}
	if want := plant.DemoParams(); !reflect.DeepEqual(p, want) {
		t.Errorf("level-demo plant differs from plant.DemoParams:\n got %+v torso %+v\nwant %+v torso %+v", p, *p.Torso, want, *want.Torso)
	}
	in := s.Initial
	st := reference.DemoStart
	if s.StanceLeg() != 0 || in.XM != 0 || len(in.LegAnglesRad) != 2 || [2]float64{in.LegAnglesRad[0], in.LegAnglesRad[1]} != st.LegAngles ||
		in.TorsoAngleRad != st.TorsoAngle || len(in.LegRatesRadps) != 2 ||
		[3]float64{in.LegRatesRadps[0], in.LegRatesRadps[1], in.TorsoRateRadps} != st.Rates {
		t.Errorf("level-demo initial state %+v differs from reference.DemoStart %+v", in, st)
	}
	if len(s.Controller.Settings) != 0 {
		t.Errorf("level-demo should run the reference controller's default gains, has settings %v", s.Controller.Settings)
	}
}

// TestLevelKneedIsTheKneedDemoWalker keeps the level-kneed scenario equal to
// the kneed walker the reference knee gains are tuned for, started from
// reference.DemoStart.
func TestLevelKneedIsTheKneedDemoWalker(t *testing.T) {
	s, err := scenarios.LoadBuiltin("level-kneed")
	if err != nil {
		t.Fatal(err)
	}
	p, err := s.PlantParams()
	if err != nil {
		t.Fatal(err)
	}
	want := reference.KneedDemoParams()
	if !reflect.DeepEqual(p, want) {
		t.Errorf("level-kneed plant differs from reference.KneedDemoParams:\n got %+v\nwant %+v", p, want)
	}
	if got := s.JointNames(); !reflect.DeepEqual(got, []string{"hip_left", "hip_right", "knee_left", "knee_right"}) {
		t.Errorf("joints %v", got)
	}
	in := s.Initial
	st := reference.DemoStart
	if s.StanceLeg() != 0 || [2]float64{in.LegAnglesRad[0], in.LegAnglesRad[1]} != st.LegAngles || in.TorsoAngleRad != st.TorsoAngle ||
		[3]float64{in.LegRatesRadps[0], in.LegRatesRadps[1], in.TorsoRateRadps} != st.Rates {
		t.Errorf("level-kneed initial state %+v differs from reference.DemoStart %+v", in, st)
	}
}

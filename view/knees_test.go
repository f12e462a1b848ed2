package view

import (
	"testing"

	"gaitrig/plant"
	"gaitrig/record"
)

// TestFrameCarriesTheKnee: a frame of a recorded row of a kneed walker
// places each knee where the plant's stick-figure points do, flexed knee
// included, so the page can bend the leg there.
func TestFrameCarriesTheKnee(t *testing.T) {
	p := plant.DemoParams()
	for i := range p.Legs {
		p.Legs[i] = plant.Leg{Length: 0.45, Mass: 2, COMDist: 0.2, Inertia: 0.04, FootRadius: 0.2,
			Shank: &plant.Shank{Length: 0.45, Mass: 1, COMDist: 0.2, Inertia: 0.01}}
	}
	m, err := plant.New(p, plant.Options{IgnoreScuff: true})
	if err != nil {
		t.Fatal(err)
	}
	s, err := m.Stand(0, 0, [2]float64{0.2, -0.3}, -0.1)
	if err != nil {
		t.Fatal(err)
	}
	n := m.NumDOF()
	s.Q[n-1] -= 0.7 // flex the right knee
	var row record.Tick
	copy(row.Q[:n], s.Q[:n])
	f := frameOfRow(m, &row, 0, 0)
	pose := m.Points(&s)
	for i := 0; i < 2; i++ {
		if f.Knee[i] != pt(pose.Knee[i]) || f.Foot[i] != pt(pose.Foot[i]) {
			t.Errorf("leg %d: frame knee %v foot %v, plant knee %v foot %v", i, f.Knee[i], f.Foot[i], pose.Knee[i], pose.Foot[i])
		}
	}
	// The flexed knee is off the line from the hip to the foot.
	h, k, ft := pose.Hip, pose.Knee[1], pose.Foot[1]
	if cross := (k[0]-h[0])*(ft[1]-h[1]) - (k[1]-h[1])*(ft[0]-h[0]); cross*cross < 1e-4 {
		t.Errorf("the flexed right knee lies on the hip–foot line (cross %g)", cross)
	}
}

package report

import (
	"math"
	"testing"

	"gaitrig/plant"
	"gaitrig/record"
)

// TestKneePlacedAsThePlantPlacesIt: the report puts a stick figure's knee
// where the plant's own stick-figure points (plant.Model.Points) have it,
// from nothing but the recorded hip, thigh angle and the manifest's thigh
// length; and it reads the coordinates of the right links for a compass
// walker and for a torso walker with knees.
func TestKneePlacedAsThePlantPlacesIt(t *testing.T) {
	for _, torso := range []bool{false, true} {
		p := plant.DemoParams()
		if !torso {
			p.Torso = nil
		}
		for i := range p.Legs {
			p.Legs[i] = plant.Leg{Length: 0.42, Mass: 2, COMDist: 0.2, Inertia: 0.04, FootRadius: 0.2,
				Shank: &plant.Shank{Length: 0.47, Mass: 1, COMDist: 0.2, Inertia: 0.01}}
		}
		m, err := plant.New(p, plant.Options{IgnoreScuff: true})
		if err != nil {
			t.Fatal(err)
		}
		s, err := m.Stand(0, 0, [2]float64{0.3, -0.2}, 0.1)
		if err != nil {
			t.Fatal(err)
		}
		n := m.NumDOF()
		s.Q[n-1] -= 0.6 // flex the right knee: its shank swings back
		man := record.Manifest{NumQ: n, Plant: record.PlantOf(p)}
		k := kneesOf(&man)
		if k == nil {
			t.Fatal("no knees read from a kneed manifest")
		}
		var row record.Tick
		copy(row.Q[:n], s.Q[:n])
		row.Feet[0] = record.Foot{Mode: 1, KneeLocked: true, KneeTorqueNM: 3}
		row.Feet[1] = record.Foot{Mode: 0, KneeLocked: false}
		k.add(&row, 0)
		pose := m.Points(&s)
		ps := stickPose{hip: pose.Hip}
		k.place(&ps, []float64{s.T}, s.T)
		for i := 0; i < 2; i++ {
			if !ps.hasKnee[i] || math.Hypot(ps.knee[i][0]-pose.Knee[i][0], ps.knee[i][1]-pose.Knee[i][1]) > 1e-12 {
				t.Errorf("torso %v: knee %d at %v, the plant has it at %v", torso, i, ps.knee[i], pose.Knee[i])
			}
		}
		if got := m.JointNames(); len(got) != m.NumActuators() {
			t.Fatalf("joints %v", got)
		}
		if k.lock[0][0] != 3 || !math.IsNaN(k.lock[1][0]) {
			t.Errorf("lock torques %v %v: want 3 for the locked stance knee, NaN for the free unlocked one", k.lock[0], k.lock[1])
		}
		if k.shank[1][0] != s.Q[n-1] {
			t.Errorf("right shank angle read from q%d as %g, want %g", k.shankQ[1], k.shank[1][0], s.Q[n-1])
		}
	}
	if kneesOf(&record.Manifest{NumQ: 5, Plant: record.PlantOf(plant.DemoParams())}) != nil {
		t.Error("knees read from a walker without knees")
	}
}

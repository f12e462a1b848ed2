package hil

import (
	"math"

	"gaitrig/plant"
)

// kneeExtremes tracks the least lock torque of a locked knee whose foot is
// on the ground: how close a stance knee came to buckling (a knee without
// a latch buckles when the torque would turn negative; a latched knee
// pulls then, and the figure shows by how much).
type kneeExtremes struct {
	minTorque float64
}

func (k *kneeExtremes) reset() { k.minTorque = math.Inf(1) }

// add takes one tick's state and contacts. It does not allocate.
func (k *kneeExtremes) add(s *plant.State, c *[2]plant.FootContact) {
	for i := range c {
		if c[i].Mode != plant.Free && s.KneeLocked[i] && c[i].KneeTorque < k.minTorque {
			k.minTorque = c[i].KneeTorque
		}
	}
}

// summary is the run's figure for record.Summary.MinKneeLockTorqueNM: nil
// for a walker without knees or a run in which no locked knee bore weight.
func (k *kneeExtremes) summary(m *plant.Model) *float64 {
	if m.NumKnees() == 0 || math.IsInf(k.minTorque, 1) {
		return nil
	}
	v := k.minTorque
	return &v
}

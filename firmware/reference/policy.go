package reference

import "gaitrig/plant"

// ReadingOf is the noise-free Reading of a plant state: exact joint angles
// and rates, the exact IMU pitch and rate, and a foot switch closed for
// every foot in contact (Mode not Free). It is what a perfect board would
// measure; the rig's sensor model adds quantization, noise and a force
// threshold on the switches.
func ReadingOf(m *plant.Model, s *plant.State) Reading {
	var r Reading
	r.Joints = m.NumActuators()
	r.Knees = kneeJoints(m.JointNames())
	if r.Joints > len(r.Angle)+r.Knees {
		r.Joints = len(r.Angle) + r.Knees
	}
	var angle, rate [MaxJoints]float64
	m.JointState(s, angle[:r.Joints], rate[:r.Joints])
	r.setJoints(angle[:r.Joints], rate[:r.Joints])
	r.Pitch, r.PitchRate = m.IMU(s)
	for i := 0; i < 2; i++ {
		if s.Mode[i] != plant.Free {
			r.Contacts |= 1 << i
		}
	}
	return r
}

// PlantPolicy returns the control law as a plant.Policy fed by ReadingOf,
// so the gait finder can analyze the closed loop: its fixed point is the
// controller's gait and its eigenvalues say how stable that gait is. The
// policy does not allocate.
func PlantPolicy(m *plant.Model, g Gains) plant.Policy {
	return func(m *plant.Model, s *plant.State, in *plant.Input) {
		r := ReadingOf(m, s)
		var tau [MaxJoints]float64
		Law(&g, &r, tau[:r.Joints])
		for i := 0; i < r.Joints; i++ {
			in.Torque[i] = tau[i]
		}
	}
}

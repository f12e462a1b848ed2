package record

import (
	"slices"
	"testing"
)

// The state columns in plant order, for the compass and the torso walker;
// written out by hand from the naming scheme in the package comment.
func TestStateColumns(t *testing.T) {
	for _, c := range []struct {
		numQ int
		q, v []string
	}{
		{4, []string{"x_hip_m", "y_hip_m", "theta_left_rad", "theta_right_rad"},
			[]string{"vx_hip_mps", "vy_hip_mps", "omega_left_radps", "omega_right_radps"}},
		{5, []string{"x_hip_m", "y_hip_m", "theta_left_rad", "theta_right_rad", "theta_torso_rad"},
			[]string{"vx_hip_mps", "vy_hip_mps", "omega_left_radps", "omega_right_radps", "omega_torso_radps"}},
		{7, []string{"x_hip_m", "y_hip_m", "theta_thigh_left_rad", "theta_thigh_right_rad", "theta_torso_rad", "theta_shank_left_rad", "theta_shank_right_rad"},
			[]string{"vx_hip_mps", "vy_hip_mps", "omega_thigh_left_radps", "omega_thigh_right_radps", "omega_torso_radps", "omega_shank_left_radps", "omega_shank_right_radps"}},
		{6, []string{"x_hip_m", "y_hip_m", "theta_thigh_left_rad", "theta_thigh_right_rad", "theta_shank_left_rad", "theta_shank_right_rad"},
			[]string{"vx_hip_mps", "vy_hip_mps", "omega_thigh_left_radps", "omega_thigh_right_radps", "omega_shank_left_radps", "omega_shank_right_radps"}},
	} {
		q, v := StateColumns(c.numQ)
		if !slices.Equal(q, c.q) || !slices.Equal(v, c.v) {
			t.Errorf("StateColumns(%d) = %v, %v; want %v, %v", c.numQ, q, v, c.q, c.v)
		}
	}
}

// TestKneeColumnsFromThePlant names the links from the manifest's plant
// record where the coordinate count alone would mislead (one kneed leg on a
// torso walker has six coordinates, as a compass walker with two knees),
// and checks the derived knee angle against the link columns.
func TestKneeColumnsFromThePlant(t *testing.T) {
	leg := Leg{LengthM: 0.45, MassKG: 2, COMM: 0.2, InertiaKGM2: 0.04, FootRadiusM: 0.2}
	kneed := leg
	kneed.Shank = &Shank{LengthM: 0.45, MassKG: 1, COMM: 0.2, InertiaKGM2: 0.01}
	m := Manifest{NumQ: 6, JointNames: []string{"hip_left", "hip_right"},
		Plant: &Plant{Legs: [2]Leg{leg, kneed}, Torso: &Torso{MassKG: 10, COMM: 0.3, InertiaKGM2: 0.5}}}
	cols := tickFieldsOf(&m)
	var names []string
	for _, c := range cols {
		names = append(names, c.Name)
	}
	for _, want := range []string{"theta_left_rad", "theta_thigh_right_rad", "theta_torso_rad", "theta_shank_right_rad", "theta_knee_right_rad", "knee_lock_torque_right_nm", "knee_locked_right"} {
		if !slices.Contains(names, want) {
			t.Errorf("no column %s in %v", want, names)
		}
	}
	for _, bad := range []string{"theta_knee_left_rad", "theta_shank_left_rad", "knee_lock_torque_left_nm"} {
		if slices.Contains(names, bad) {
			t.Errorf("column %s for a straight leg", bad)
		}
	}
	var row Tick
	row.Q[3], row.Q[5] = 0.3, -0.1 // right thigh, right shank
	row.V[3], row.V[5] = 1, 3
	for _, c := range cols {
		switch c.Name {
		case "theta_knee_right_rad":
			if got := c.real(&row); got != -0.1-0.3 {
				t.Errorf("knee angle %g, want %g", got, -0.1-0.3)
			}
		case "omega_knee_right_radps":
			if got := c.real(&row); got != 2 {
				t.Errorf("knee rate %g, want 2", got)
			}
		}
	}
}

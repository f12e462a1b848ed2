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
	} {
		q, v := StateColumns(c.numQ)
		if !slices.Equal(q, c.q) || !slices.Equal(v, c.v) {
			t.Errorf("StateColumns(%d) = %v, %v; want %v, %v", c.numQ, q, v, c.q, c.v)
		}
	}
}

package plant

import (
	"errors"
	"testing"
)

// TestBadStanceIsAnError: the analysis entry points take hand-made states;
// a stance index that is not a foot must give an error (or, for Reduced,
// the coordinates of a repaired state), not an index out of range.
func TestBadStanceIsAnError(t *testing.T) {
	m, err := New(DemoParams(), Options{})
	if err != nil {
		t.Fatal(err)
	}
	good, err := m.Stand(0, 0, [2]float64{0.2, -0.2}, 0)
	if err != nil {
		t.Fatal(err)
	}
	for _, stance := range []int{-3, 2, 7} {
		s := good
		s.Stance = stance
		if z := m.Reduced(&s); len(z) != 2*m.NumLinks() {
			t.Errorf("stance %d: Reduced gave %d coordinates, want %d", stance, len(z), 2*m.NumLinks())
		}
		if s.Stance != stance {
			t.Errorf("stance %d: Reduced changed the caller's state (stance now %d)", stance, s.Stance)
		}
		if _, err := FindGait(m, nil, s, GaitOptions{MaxIter: 1}); !errors.Is(err, ErrStand) {
			t.Errorf("stance %d: FindGait gave %v, want an ErrStand", stance, err)
		}
		if _, err := m.MapJacobian(s, nil, GaitOptions{}); !errors.Is(err, ErrStand) {
			t.Errorf("stance %d: MapJacobian gave %v, want an ErrStand", stance, err)
		}
		if _, err := m.MapJacobianFD(s, nil, GaitOptions{}, 1e-6); !errors.Is(err, ErrStand) {
			t.Errorf("stance %d: MapJacobianFD gave %v, want an ErrStand", stance, err)
		}
	}
}

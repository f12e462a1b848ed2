package plant

import (
	"errors"
	"math"
	"strings"
	"testing"
)

// TestStandNamesTheBadValue: a non-finite position or angle is refused
// with an error that says which one it was.
func TestStandNamesTheBadValue(t *testing.T) {
	m, err := New(DemoParams(), Options{})
	if err != nil {
		t.Fatal(err)
	}
	nan := math.NaN()
	for _, c := range []struct {
		name  string
		x     float64
		legs  [2]float64
		torso float64
	}{
		{"hip position x", math.Inf(1), [2]float64{0.2, -0.2}, 0},
		{"left leg angle", 0, [2]float64{nan, -0.2}, 0},
		{"right leg angle", 0, [2]float64{0.2, nan}, 0},
		{"torso angle", 0, [2]float64{0.2, -0.2}, nan},
	} {
		_, err := m.Stand(0, c.x, c.legs, c.torso)
		if !errors.Is(err, ErrStand) || !strings.Contains(err.Error(), c.name) {
			t.Errorf("%s not finite: got %v, want an ErrStand naming the %s", c.name, err, c.name)
		}
	}
}

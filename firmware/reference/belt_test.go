package reference

import (
	"math"
	"testing"
)

// TestBeltTerm: the belt term moves the speed target by −Gain·p, clipped
// to ±MaxShift, only when the reading has a belt place; the torques off
// the belt are those of the law with the term set to zero (checked against
// Law with zero belt gains, an independent path through the same law).
func TestBeltTerm(t *testing.T) {
	g := DefaultGains()
	for _, c := range []struct {
		on   bool
		pos  float64
		want float64
	}{
		{false, 0.5, g.TargetSpeed},
		{true, 0, g.TargetSpeed},
		{true, 0.25, g.TargetSpeed - g.Belt.Gain*0.25},
		{true, -0.25, g.TargetSpeed + g.Belt.Gain*0.25},
		{true, 5, g.TargetSpeed - g.Belt.MaxShift},
		{true, -5, g.TargetSpeed + g.Belt.MaxShift},
	} {
		r := Reading{Joints: 2, OnBelt: c.on, BeltPos: c.pos}
		if got := withBelt(&g, &r).TargetSpeed; math.Abs(got-c.want) > 1e-15 {
			t.Errorf("on belt %v at %g m: target %g, want %g", c.on, c.pos, got, c.want)
		}
	}
	// A reading mid-stride, the same on fixed ground and in the middle of
	// a belt: the same torques; behind the middle, a different swing.
	base := Reading{Joints: 2, Angle: [2]float64{0.3, -0.2}, Rate: [2]float64{-0.9, 1.2}, Pitch: -0.1, PitchRate: 0.05, Contacts: 1}
	off := DefaultGains()
	off.Belt = BeltGains{}
	var a, b, c [2]float64
	Law(&off, &base, a[:])
	mid := base
	mid.OnBelt = true
	Law(&g, &mid, b[:])
	if a != b {
		t.Errorf("the middle of the belt changes the torques: %v against %v", b, a)
	}
	behind := mid
	behind.BeltPos = -0.4
	Law(&g, &behind, c[:])
	if c == a {
		t.Error("0.4 m behind the middle of the belt, the torques did not change")
	}
}

package rig

import (
	"math"
	"testing"

	"gaitrig/hil"
)

// TestBeltTermHoldsPlace: the reference firmware's belt term (its place on
// the belt from the state, docs/protocol.md section 3.3) is what keeps it
// on a belt it cannot match by its speed loop alone. On treadmill-steady's
// belt tilted 2° uphill the demo walker's speed loop settles about
// 0.36 m/s below the belt (firmware/reference/belt.go): with the term off
// it drifts backward off the middle until an end alarm or the harness
// stops it; with the term on it walks all 30 steps and stays within 0.6 m
// of the middle. The positions come from the telemetry's belt column, an
// independent record of what the rig computed for the state.
func TestBeltTermHoldsPlace(t *testing.T) {
	uphill := func(gain string) []string {
		return []string{"    - length_m: 4   # the belt\n", "    - length_m: 4   # the belt\n      slope_rad: 0.0349\n",
			"  mode: walk\n", "  mode: walk\n  settings:\n    belt_gain: " + gain + "\n"}
	}
	furthest := func(ticks []float64) float64 {
		w := 0.0
		for _, p := range ticks {
			w = math.Max(w, math.Abs(p-2)) // the belt is 4 m long
		}
		return w
	}
	on := variant(t, "treadmill-steady", uphill("1")...)
	resOn, _, ticksOn := runFolder(t, on)
	posOn := make([]float64, len(ticksOn))
	for i := range ticksOn {
		posOn[i] = ticksOn[i].BeltPos
	}
	off := variant(t, "treadmill-steady", uphill("0")...)
	resOff, _, ticksOff := runFolder(t, off)
	posOff := make([]float64, len(ticksOff))
	for i := range ticksOff {
		posOff[i] = ticksOff[i].BeltPos
	}
	t.Logf("term on: %s, %d steps, furthest %.3f m from the middle; off: %s (%s), %d steps, furthest %.3f m",
		resOn.Summary.Outcome, resOn.Summary.Steps, furthest(posOn), resOff.Summary.Outcome, resOff.Summary.Reason, resOff.Summary.Steps, furthest(posOff))
	if resOn.Summary.Steps < 30 || resOn.Summary.Alarms[hil.AlarmBeltEndNear]+resOn.Summary.Alarms[hil.AlarmHarnessCaught] != 0 {
		t.Errorf("term on: %d steps, outcome %s (%s)", resOn.Summary.Steps, resOn.Summary.Outcome, resOn.Summary.Reason)
	}
	if w := furthest(posOn); !(w < 0.6) {
		t.Errorf("term on: the hip went %.3g m from the middle", w)
	}
	if resOff.Summary.Steps >= 30 {
		t.Errorf("term off: walked all %d steps uphill; the test no longer shows what the term does", resOff.Summary.Steps)
	}
	if last := posOff[len(posOff)-1]; !(last < 2-0.6) {
		t.Errorf("term off: the hip ended %.3g m from the rear end, want a backward drift beyond 0.6 m", last)
	}
}

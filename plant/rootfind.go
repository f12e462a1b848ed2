package plant

import "math"

// illinois finds the time τ in (0, h] at which a condition crosses zero,
// by the Illinois variant of regula falsi on the step length. cond(t)
// re-integrates the step to length t and returns the condition there; fa
// (> 0) and fb (≤ 0) are its values at 0 and h. The step integrators keep
// their own trial states and tolerances, so both the fixed-step (RK4) and
// the adaptive (Dormand–Prince) event location share this one search.
//
// It returns a time at or just after the crossing (where the condition is
// ≤ 0, so the state handed to the event is on the far side of it): the
// bracket shrinks until it is narrower than width, or the condition is
// within rel of the bracket's end values. A NaN trial counts as the far
// side, so a failing evaluation cannot stall the search. cond must not
// keep a reference to anything it captures beyond the call, so that the
// closure stays on the stack and the hot loop stays allocation-free.
func illinois(fa, fb, h, width, rel float64, cond func(t float64) float64) float64 {
	a, b := 0.0, h
	side := 0
	for it := 0; it < 100 && b-a > width; it++ {
		t := b - fb*(b-a)/(fb-fa)
		if !(t > a && t < b) {
			t = 0.5 * (a + b)
		}
		f := cond(t)
		if math.IsNaN(f) {
			f = fb
		}
		if f <= 0 {
			b, fb = t, f
			if side == -1 {
				fa *= 0.5
			}
			side = -1
		} else {
			a, fa = t, f
			if side == +1 {
				fb *= 0.5
			}
			side = +1
		}
		if f <= 0 && (f == 0 || -f < rel*(math.Abs(fa)+math.Abs(fb))) {
			return t
		}
	}
	return b
}

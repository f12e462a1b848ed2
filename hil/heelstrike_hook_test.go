package hil

import (
	"context"
	"testing"

	"gaitrig/plant"
)

// TestAfterHeelStrikeChangesTheNextTick checks the hook of the stability
// analysis: it is called once per completed step with the step number, a
// heel-strike time inside the tick just stepped and the plant state at its
// end, and a rate it changes there is the rate the next telemetry row
// starts from (the row after the heel strike integrates from the changed
// state, so its stance-leg rate differs from an unhooked run's).
func TestAfterHeelStrikeChangesTheNextTick(t *testing.T) {
	m, s, cfg := demo(t, 6)
	_, _, plain := runAndRead(t, context.Background(), cfg, m, s, referenceFirmware)

	var steps []int
	var strikeTicks []float64
	hooked := cfg
	hooked.AfterHeelStrike = func(step int, strikeT float64, st *plant.State, in *plant.Input) {
		steps = append(steps, step)
		if !(strikeT <= st.T && strikeT > st.T-1.0/DefaultTickHz-1e-12) {
			t.Errorf("step %d: heel strike at %g s is not inside the tick ending at %g s", step, strikeT, st.T)
		}
		strikeTicks = append(strikeTicks, st.T)
		if step == 3 {
			// Slow every link by 5 % within the rolling constraint; the
			// positions stay.
			z := m.Reduced(st)
			for i := m.NumLinks(); i < len(z); i++ {
				z[i] *= 0.95
			}
			ns, err := m.FromReduced(z, st.Stance, st.Q[0])
			if err != nil {
				t.Fatal(err)
			}
			st.V = ns.V
		}
	}
	_, _, ticks := runAndRead(t, context.Background(), hooked, m, s, referenceFirmware)
	if len(steps) != 6 || steps[0] != 1 || steps[5] != 6 {
		t.Fatalf("hook called for steps %v, want 1 … 6", steps)
	}
	// Rows are identical up to the tick of heel strike 3 and differ after.
	at := -1
	for i := range ticks {
		if ticks[i].T == strikeTicks[2] {
			at = i
			break
		}
	}
	if at < 0 || at+1 >= len(plain) {
		t.Fatalf("no row at the heel strike of step 3 (t = %g)", strikeTicks[2])
	}
	if ticks[at].V != plain[at].V {
		t.Error("the row of the heel-strike tick already differs: the hook ran before the record")
	}
	if ticks[at+1].V == plain[at+1].V {
		t.Error("the row after the hook is the same as without it: the change did not reach the plant")
	}
}

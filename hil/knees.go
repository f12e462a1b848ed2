package hil

import (
	"fmt"
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

// kneeUnlock carries the firmware's knee unlock bits (protocol.Command
// KneeUnlock, docs/protocol.md section 3.4.1) from the command that sets
// them to the plant state before the next tick is stepped.
type kneeUnlock struct {
	pending uint8 // bits of commands taken since the last tick, to apply
	noted   uint8 // bits already noted as ignored (knee_unlock_ignored), once per run
}

// kneeUnlockIgnored is the info event of a knee_unlock bit the walker
// cannot honour.
const kneeUnlockIgnored = "knee_unlock_ignored"

// takeKneeUnlock takes the unlock bits of a valid command: the bits of
// knees with a latch and an actuator wait for the next tick; any other bit
// is ignored and noted once per run in the events, so a firmware that
// believes in a latch the walker does not have is told.
func (r *runner) takeKneeUnlock(bits uint8) {
	if bits == 0 {
		return
	}
	ku := &r.pt.unlock
	for b := 0; b < 8; b++ {
		bit := uint8(1) << b
		if bits&bit == 0 {
			continue
		}
		if b < 2 && r.m.KneeHasLatch(b) && r.m.KneeActuated(b) {
			ku.pending |= bit
			continue
		}
		if ku.noted&bit != 0 {
			continue
		}
		ku.noted |= bit
		var why string
		switch {
		case b >= 2:
			why = fmt.Sprintf("bit %d names no knee (bit 0 is the left knee, bit 1 the right)", b)
		case !r.m.HasKnee(b):
			why = fmt.Sprintf("bit %d: this walker's %s leg has no knee", b, footName(b))
		case !r.m.KneeHasLatch(b):
			why = fmt.Sprintf("bit %d: the %s knee has no latch", b, footName(b))
		default:
			why = fmt.Sprintf("bit %d: the %s knee has no actuator", b, footName(b))
		}
		r.al.info(kneeUnlockIgnored, r.pt.tick, r.pt.s.T,
			"the firmware asked to release a knee latch (command knee_unlock "+fmt.Sprintf("0x%02x", bits)+"); "+why+": ignored, noted once per run",
			map[string]float64{"bit": float64(b), "knee_unlock": float64(bits)})
	}
}

// applyKneeUnlock releases the latches the commands asked for, before the
// tick is stepped; after an e-stop nothing is released. It does not
// allocate.
func (r *runner) applyKneeUnlock() {
	ku := &r.pt.unlock
	if ku.pending == 0 {
		return
	}
	if !r.end.set() {
		for i := 0; i < 2; i++ {
			if ku.pending&(1<<i) != 0 {
				r.m.ReleaseKneeLatch(&r.pt.s, i)
			}
		}
	}
	ku.pending = 0
}

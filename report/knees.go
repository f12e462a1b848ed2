package report

import (
	"math"
	"sort"

	"gaitrig/record"

	"gonum.org/v1/plot/vg"
)

// kneeSeries holds what the report draws of a walker's knees: the link
// angles that place each knee in the stick figures and the lock torque of
// each knee over time. It is nil for a walker without knees.
type kneeSeries struct {
	kneed    [2]bool    // leg i has a knee
	thighLen [2]float64 // hip to knee, m
	thighQ   [2]int     // coordinate of leg i's thigh angle
	shankQ   [2]int     // coordinate of leg i's shank angle
	thigh    [2][]float64
	shank    [2][]float64
	// lock is the knee-lock torque while the knee is locked and its foot
	// on the ground, NaN otherwise (a line along zero all swing would hide
	// the stance values that matter).
	lock [2][]float64
}

// kneesOf reads the knees from the manifest's plant record: which legs
// have one, their thigh lengths and where their angles sit in q (legs, then
// the torso, then the shanks left first, as the plant orders them). It
// returns nil when the manifest records no plant or no knee.
func kneesOf(m *record.Manifest) *kneeSeries {
	p := m.Plant
	if p == nil || p.OneLeg {
		return nil
	}
	k := &kneeSeries{}
	next := 4
	if p.Torso != nil {
		next = 5
	}
	for i, l := range p.Legs {
		if l.Shank == nil {
			continue
		}
		k.kneed[i], k.thighLen[i], k.thighQ[i], k.shankQ[i] = true, l.LengthM, 2+i, next
		next++
	}
	if (!k.kneed[0] && !k.kneed[1]) || next > m.NumQ || next > record.MaxQ {
		return nil
	}
	return k
}

// add takes one telemetry row; modeFree is the contact code of a foot in
// the air.
func (k *kneeSeries) add(t *record.Tick, modeFree int) {
	for i := range k.kneed {
		if !k.kneed[i] {
			continue
		}
		k.thigh[i] = append(k.thigh[i], t.Q[k.thighQ[i]])
		k.shank[i] = append(k.shank[i], t.Q[k.shankQ[i]])
		lock := math.NaN()
		if f := &t.Feet[i]; f.KneeLocked && f.Mode != modeFree {
			lock = f.KneeTorqueNM
		}
		k.lock[i] = append(k.lock[i], lock)
	}
}

// place puts the knees into a heel-strike pose from the telemetry row
// nearest its time te (ts are the rows' times, ascending): the knee is
// the thigh length along the thigh's axis from the hip, (sin θ, −cos θ).
func (k *kneeSeries) place(ps *stickPose, ts []float64, te float64) {
	if len(ts) == 0 || math.IsNaN(te) {
		return
	}
	j := sort.SearchFloat64s(ts, te)
	if j == len(ts) || (j > 0 && te-ts[j-1] < ts[j]-te) {
		j--
	}
	for i := range k.kneed {
		if !k.kneed[i] || j >= len(k.thigh[i]) {
			continue
		}
		s, c := math.Sincos(k.thigh[i][j])
		ps.knee[i] = [2]float64{ps.hip[0] + k.thighLen[i]*s, ps.hip[1] - k.thighLen[i]*c}
		ps.hasKnee[i] = !math.IsNaN(ps.knee[i][0]) && !math.IsNaN(ps.knee[i][1])
	}
}

// kneeFigure: the lock torque of each knee while it bears weight, against
// the zero line below which a knee held by its stop alone buckles (only a
// latch can hold it there).
func kneeFigure(fs *figureSet, v *view) error {
	k := v.knees
	if k == nil {
		return nil
	}
	tlo, thi := span(v.t)
	var lines []line
	for i := range k.kneed {
		if k.kneed[i] {
			lines = append(lines, line{label: footNames[i] + " knee", x: v.t, y: k.lock[i], color: lineColors[i], dashed: i == 1})
		}
	}
	lines = append(lines, line{label: "zero: below it the stop would have to pull", x: []float64{tlo, thi}, y: []float64{0, 0}, color: colLimit, dashed: true, width: vg.Points(1.2)})
	_, err := fs.timePlot(v, "plot-knee-lock", "Knee-lock torque of the stance knees", "torque (N·m)",
		"Torque the stop (or latch) of a locked knee applies while its foot is on the ground; positive while the stop pushes against hyperextension. "+
			"Below zero the stop would have to pull: a knee without a latch buckles there (the knee_buckle alarm), a latched knee holds. "+
			"No line while the knee is unlocked or its foot in the air.", lines, figH)
	return err
}

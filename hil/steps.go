package hil

import (
	"math"

	"gaitrig/plant"
	"gaitrig/record"
)

// stepTracker accumulates the per-step metrics between heel strikes.
type stepTracker struct {
	count      int
	startT     float64
	startX     float64 // contact point x of the stance foot at the step's start
	stance     int
	peakUtil   float64
	minNormal  float64
	pos, neg   float64
	copMin     float64
	copMax     float64
	weight     float64 // m g, N
	radius     [2]float64
	sumLength  float64
	sumTime    float64
	haveStance bool
}

func (t *stepTracker) init(m *plant.Model, s *plant.State) {
	p := m.Params()
	mass := p.HipMass
	for i := 0; i < m.NumFeet(); i++ {
		mass += p.Legs[i].Mass
		t.radius[i] = p.Legs[i].FootRadius
	}
	if p.Torso != nil {
		mass += p.Torso.Mass
	}
	t.weight = mass * p.Gravity
	t.startT = s.T
	t.stance = s.Stance
	c := m.Contacts(s, &plant.Input{})
	t.startX = c[s.Stance].Point[0]
	t.reset()
}

func (t *stepTracker) reset() {
	t.peakUtil, t.minNormal = 0, math.Inf(1)
	t.pos, t.neg = 0, 0
	t.copMin, t.copMax = math.Inf(1), math.Inf(-1)
}

// tick adds one tick's actuator work and the stance foot's contact.
func (t *stepTracker) tick(pos, neg float64, fc *plant.FootContact) {
	t.pos += pos
	t.neg += neg
	if fc.Mode == plant.Free {
		return
	}
	if fc.Utilization > t.peakUtil || math.IsNaN(fc.Utilization) {
		t.peakUtil = fc.Utilization
	}
	if fc.Normal < t.minNormal {
		t.minNormal = fc.Normal
	}
	t.copMin = math.Min(t.copMin, fc.CoP)
	t.copMax = math.Max(t.copMax, fc.CoP)
}

// strike closes the step at heel-strike event e (s and res are the state
// and contacts at the end of the tick that held it) and starts the next.
func (t *stepTracker) strike(m *plant.Model, s *plant.State, e *plant.Event, res *plant.TickResult) record.Step {
	t.count++
	newStance := e.Foot
	if newStance < 0 || newStance > 1 {
		newStance = s.Stance
	}
	x := res.Contacts[newStance].Point[0]
	st := record.Step{
		Index:           t.count,
		Stance:          t.stance,
		StartS:          t.startT,
		EndS:            e.T,
		DurationS:       e.T - t.startT,
		LengthM:         x - t.startX,
		PeakUtilization: t.peakUtil,
		MinNormalN:      t.minNormal,
		ImpactLossJ:     e.EnergyLost,
		PosWorkJ:        t.pos,
		NegWorkJ:        t.neg,
	}
	if st.DurationS > 0 {
		st.SpeedMPS = st.LengthM / st.DurationS
	}
	if st.LengthM > 0 && t.weight > 0 {
		st.CostOfTransport = st.PosWorkJ / (t.weight * st.LengthM)
	}
	if t.copMax >= t.copMin {
		st.CoPTravelM = t.copMax - t.copMin
	}
	if math.IsInf(st.MinNormalN, 1) {
		st.MinNormalN = 0
	}
	st.Pose = pose(m, s, t.radius)
	if st.DurationS > 0 {
		t.sumLength += st.LengthM
		t.sumTime += st.DurationS
	}
	t.startT, t.startX, t.stance = e.T, x, newStance
	t.reset()
	return st
}

// meanSpeed is total step length over total step time.
func (t *stepTracker) meanSpeed() float64 {
	if t.sumTime <= 0 {
		return 0
	}
	return t.sumLength / t.sumTime
}

// pose converts the plant's stick-figure points: each foot is drawn at the
// lowest point of its arc.
func pose(m *plant.Model, s *plant.State, radius [2]float64) record.Pose {
	p := m.Points(s)
	out := record.Pose{Hip: p.Hip, TorsoTop: p.TorsoTop, HasTorso: m.HasTorso()}
	for i := 0; i < 2; i++ {
		out.Feet[i] = [2]float64{p.ArcCentre[i][0], p.ArcCentre[i][1] - radius[i]}
	}
	return out
}

package hil

// This file owns step tracking: the per-step metrics accumulated between
// heel strikes (duration, length, work, friction and normal-force extremes,
// centre-of-pressure travel) and the run's mean speed.

import (
	"math"

	"gaitrig/plant"
	"gaitrig/record"
)

// stepTracker accumulates the per-step metrics between heel strikes.
type stepTracker struct {
	count     int
	startT    float64
	startX    float64 // contact point x of the stance foot at the step's start
	stance    int
	contact   contactExtremes
	pos, neg  float64
	copMin    float64
	copMax    float64
	weight    float64 // m g, N
	radius    [2]float64
	sumLength float64
	// beltX is how far the belt surface has moved along x since the start
	// (treadmill.go adds each tick's travel), beltStart its value at the
	// step's start: a step's length is measured on the belt, the distance
	// the walker covers relative to the ground under it.
	beltX, beltStart float64
	sumTime          float64
}

// contactExtremes tracks the peak friction utilization and the least normal
// force of a foot while it touches the ground, over a step or a whole run.
// A NaN utilization is kept as the peak (no later finite value replaces it),
// so a non-finite contact shows in the figures instead of hiding behind a
// later peak.
type contactExtremes struct {
	peakUtil, minNormal float64
}

func (c *contactExtremes) reset() { c.peakUtil, c.minNormal = 0, math.Inf(1) }

// peak takes a utilization that is not the stance foot's rolling contact
// (the other foot's heel strike or slip).
func (c *contactExtremes) peak(u float64) {
	if u > c.peakUtil || math.IsNaN(u) {
		c.peakUtil = u
	}
}

// add takes one tick's contact; a foot in the air counts for neither figure.
func (c *contactExtremes) add(fc *plant.FootContact) {
	if fc.Mode == plant.Free {
		return
	}
	if fc.Utilization > c.peakUtil || math.IsNaN(fc.Utilization) {
		c.peakUtil = fc.Utilization
	}
	if fc.Normal < c.minNormal {
		c.minNormal = fc.Normal
	}
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
	t.contact.reset()
	t.pos, t.neg = 0, 0
	t.copMin, t.copMax = math.Inf(1), math.Inf(-1)
}

// tick adds one tick's actuator work and the stance foot's contact.
func (t *stepTracker) tick(pos, neg float64, fc *plant.FootContact) {
	t.pos += pos
	t.neg += neg
	t.contact.add(fc)
	if fc.Mode == plant.Free {
		return
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
		LengthM:         x - t.startX - (t.beltX - t.beltStart),
		PeakUtilization: t.contact.peakUtil,
		MinNormalN:      t.contact.minNormal,
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
	t.beltStart = t.beltX
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

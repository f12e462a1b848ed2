package plant

import (
	"fmt"
	"math"
)

// MaxLinks is the largest number of rigid links a model can have: two
// thighs (or straight legs), a torso and two shanks.
const MaxLinks = 5

// MaxDOF is the size of the fixed arrays that hold q and q̇: two hip
// coordinates plus one absolute angle per link.
const MaxDOF = 2 + MaxLinks

// MaxActuators is the largest number of joint torques a model takes: two
// hips and two knees.
const MaxActuators = 4

// Leg describes one leg: a rigid link from the hip to a circular-arc foot,
// or, with Shank set, a thigh from the hip to the knee and a shank from the
// knee to the foot. With a shank, Length, Mass, COMDist and Inertia describe
// the thigh, and the foot (FootRadius, ArcOffset) is fixed to the shank.
type Leg struct {
	Length     float64 // hip to the foot (with a shank: hip to the knee) along the leg axis, m, > 0
	Mass       float64 // kg, ≥ 0
	COMDist    float64 // centre of mass distance from the hip along the leg axis, m
	Inertia    float64 // about the leg's centre of mass, kg·m², ≥ 0
	FootRadius float64 // arc radius R, m, 0 ≤ R ≤ the foot link's length (0: point foot)
	ArcOffset  float64 // forward offset of the arc centre from the foot link's axis, m
	Shank      *Shank  // nil: a straight leg, one link from the hip to the foot
}

// Shank is the lower link of a leg with a knee, hinged at the thigh's end.
// Its angle is absolute like every link's; the knee angle θ_shank − θ_thigh
// is zero with the leg straight and negative when the knee flexes (the foot
// swings back).
type Shank struct {
	Length  float64 // knee to the foot along the shank axis, m, > 0
	Mass    float64 // kg, ≥ 0
	COMDist float64 // centre of mass distance from the knee along the shank axis, m
	Inertia float64 // about the shank's centre of mass, kg·m², ≥ 0
	// Actuated gives the knee a torque actuator between thigh and shank
	// (a joint "knee_left" or "knee_right" after the hips); false leaves
	// the knee passive.
	Actuated bool
	// Latch holds the knee at its stop with torque of either sign: it
	// engages when the knee strikes its stop and at the leg's heel strike
	// (if the knee is at its stop then), and releases when the leg's foot
	// leaves the ground. Without a latch the stop only pushes: the knee
	// unlocks when the stop would have to pull (a knee_buckle event while
	// the foot is on the ground).
	Latch bool
	// StopAngle is the knee angle θ_shank − θ_thigh at the knee's stop,
	// rad: the knee cannot extend beyond it, a locked knee holds it, and
	// a knee strike happens when the knee reaches it. 0 (the default) is
	// the straight leg; negative stops the knee slightly flexed, positive
	// lets it hyperextend. |StopAngle| < π/2.
	StopAngle float64
}

// Torso describes the optional torso link, hinged at the hip and pointing up.
type Torso struct {
	Mass    float64 // kg, ≥ 0
	COMDist float64 // centre of mass distance from the hip along the torso axis, m
	Inertia float64 // about the torso's centre of mass, kg·m², ≥ 0
}

// Segment is one straight piece of the terrain polyline.
type Segment struct {
	Length    float64 // m, > 0
	Slope     float64 // rad, positive = uphill going forward, |Slope| < π/2
	MuStatic  float64 // static friction coefficient, ≥ 0
	MuKinetic float64 // kinetic (Coulomb) friction coefficient, 0 ≤ μ_k ≤ μ_s
	// Belt makes the segment a treadmill belt: its surface moves along the
	// segment with the speed Input.Belt gives for each tick (see the package
	// documentation, "Moving ground"). At most one segment is a belt.
	Belt bool
}

// Terrain is a polyline of straight segments starting at Start (x, y). The
// first segment continues backward and the last one forward without end, so
// a walker never runs off the terrain.
type Terrain struct {
	Start    [2]float64 // first vertex (x, y), m
	Segments []Segment  // the segments in order, each starting where the last one ends
}

// Params is the full description of a walker. Legs[0] is the left leg,
// Legs[1] the right leg. With Torso nil the walker is a compass walker with
// one hip actuator between the legs; with a torso it has one hip actuator
// per leg, acting between the torso and that leg.
type Params struct {
	HipMass float64 // point mass at the hip, kg, ≥ 0
	Legs    [2]Leg  // left, right
	Torso   *Torso  // nil: a compass walker without a torso
	Gravity float64 // m/s², > 0
	Terrain Terrain // the ground the walker walks on
	// OneLeg keeps only Legs[0]: a single rigid body rolling on its foot
	// arc, with no actuator. It exists for checks such as a rocking
	// half-disk; Legs[1] and Torso are then ignored.
	OneLeg bool
}

// ParamError reports an invalid parameter: which one and why.
type ParamError struct {
	Field  string  // e.g. "Legs[1].FootRadius"
	Value  float64 // the offending value
	Reason string  // e.g. "must be between 0 and the leg length 0.9"
}

// Error says which parameter is invalid and why.
func (e *ParamError) Error() string {
	return fmt.Sprintf("plant: %s = %g: %s", e.Field, e.Value, e.Reason)
}

func perr(field string, v float64, format string, a ...any) error {
	return &ParamError{Field: field, Value: v, Reason: fmt.Sprintf(format, a...)}
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// Validate checks every parameter and returns the first problem found as a
// *ParamError naming the parameter and the reason.
func (p Params) Validate() error {
	if !finite(p.HipMass) || p.HipMass < 0 {
		return perr("HipMass", p.HipMass, "must be a finite mass ≥ 0 kg")
	}
	if !finite(p.Gravity) || p.Gravity <= 0 {
		return perr("Gravity", p.Gravity, "must be a finite acceleration > 0 m/s²")
	}
	nLegs := 2
	if p.OneLeg {
		nLegs = 1
	}
	total := p.HipMass
	for i := 0; i < nLegs; i++ {
		l := p.Legs[i]
		f := fmt.Sprintf("Legs[%d].", i)
		switch {
		case !finite(l.Length) || l.Length <= 0:
			return perr(f+"Length", l.Length, "must be a finite length > 0 m")
		case !finite(l.Mass) || l.Mass < 0:
			return perr(f+"Mass", l.Mass, "must be a finite mass ≥ 0 kg")
		case !finite(l.COMDist) || math.Abs(l.COMDist) > 10*l.Length:
			return perr(f+"COMDist", l.COMDist, "must be finite and within 10 leg lengths of the hip")
		case !finite(l.Inertia) || l.Inertia < 0:
			return perr(f+"Inertia", l.Inertia, "must be a finite inertia ≥ 0 kg·m²")
		}
		footLen, footName := l.Length, "leg"
		if sh := l.Shank; sh != nil {
			g := f + "Shank."
			switch {
			case !finite(sh.Length) || sh.Length <= 0:
				return perr(g+"Length", sh.Length, "must be a finite length > 0 m")
			case !finite(sh.Mass) || sh.Mass < 0:
				return perr(g+"Mass", sh.Mass, "must be a finite mass ≥ 0 kg")
			case !finite(sh.COMDist) || math.Abs(sh.COMDist) > 10*sh.Length:
				return perr(g+"COMDist", sh.COMDist, "must be finite and within 10 shank lengths of the knee")
			case !finite(sh.Inertia) || sh.Inertia < 0:
				return perr(g+"Inertia", sh.Inertia, "must be a finite inertia ≥ 0 kg·m²")
			case sh.Mass*sh.COMDist*sh.COMDist+sh.Inertia <= 0:
				return perr(g+"Inertia", sh.Inertia, "the shank has neither mass away from the knee nor inertia, so its angle would have no inertia")
			case !finite(sh.StopAngle) || math.Abs(sh.StopAngle) >= math.Pi/2:
				return perr(g+"StopAngle", sh.StopAngle, "must be a finite knee angle, |angle| < π/2 rad")
			}
			footLen, footName = sh.Length, "shank"
			total += sh.Mass
		}
		switch {
		case !finite(l.FootRadius) || l.FootRadius < 0 || l.FootRadius > footLen:
			return perr(f+"FootRadius", l.FootRadius, "must be between 0 and the %s length %g m", footName, footLen)
		case !finite(l.ArcOffset) || math.Abs(l.ArcOffset) > footLen:
			return perr(f+"ArcOffset", l.ArcOffset, "must be finite and no larger than the %s length %g m", footName, footLen)
		case l.Shank == nil && l.Mass*l.COMDist*l.COMDist+l.Inertia <= 0:
			return perr(f+"Inertia", l.Inertia, "the leg has neither mass away from the hip nor inertia, so its angle would have no inertia")
		case l.Shank != nil && l.Mass*l.COMDist*l.COMDist+l.Inertia+l.Shank.Mass*l.Length*l.Length <= 0:
			return perr(f+"Inertia", l.Inertia, "the thigh and shank have no mass away from the hip and no inertia, so the thigh angle would have no inertia")
		}
		total += l.Mass
	}
	if p.Torso != nil && !p.OneLeg {
		t := p.Torso
		switch {
		case !finite(t.Mass) || t.Mass < 0:
			return perr("Torso.Mass", t.Mass, "must be a finite mass ≥ 0 kg")
		case !finite(t.COMDist) || math.Abs(t.COMDist) > 100:
			return perr("Torso.COMDist", t.COMDist, "must be finite and within 100 m of the hip")
		case !finite(t.Inertia) || t.Inertia < 0:
			return perr("Torso.Inertia", t.Inertia, "must be a finite inertia ≥ 0 kg·m²")
		case t.Mass*t.COMDist*t.COMDist+t.Inertia <= 0:
			return perr("Torso.Inertia", t.Inertia, "the torso has neither mass away from the hip nor inertia, so its angle would have no inertia")
		}
		total += t.Mass
	}
	if total <= 0 {
		return perr("HipMass", p.HipMass, "the walker has no mass at all")
	}
	if len(p.Terrain.Segments) == 0 {
		return perr("Terrain.Segments", 0, "needs at least one segment")
	}
	if !finite(p.Terrain.Start[0]) || !finite(p.Terrain.Start[1]) {
		return perr("Terrain.Start", p.Terrain.Start[0]+p.Terrain.Start[1], "must be a finite point")
	}
	belts := 0
	for i, s := range p.Terrain.Segments {
		f := fmt.Sprintf("Terrain.Segments[%d].", i)
		if s.Belt {
			belts++
			if belts > 1 {
				// Input.Belt carries one speed: two belts would have to
				// run in lockstep, which no treadmill guarantees.
				return perr(f+"Belt", 1, "a second belt segment: one belt per terrain")
			}
		}
		switch {
		case !finite(s.Length) || s.Length <= 0:
			return perr(f+"Length", s.Length, "must be a finite length > 0 m")
		case !finite(s.Slope) || math.Abs(s.Slope) >= math.Pi/2:
			return perr(f+"Slope", s.Slope, "must be finite with |slope| < π/2 rad")
		case !finite(s.MuStatic) || s.MuStatic < 0:
			return perr(f+"MuStatic", s.MuStatic, "must be a finite coefficient ≥ 0")
		case !finite(s.MuKinetic) || s.MuKinetic < 0 || s.MuKinetic > s.MuStatic:
			return perr(f+"MuKinetic", s.MuKinetic, "must be between 0 and MuStatic %g", s.MuStatic)
		}
	}
	return nil
}

// Defaults of Options (the scenario loader refers to these, so a scenario
// that leaves a field out and a caller of New that leaves it zero get the
// same plant).
const (
	// DefaultSubSteps is the number of RK4 sub-steps per tick: at a 1 kHz
	// tick one 1 ms step. It is chosen by the accuracy budget (package
	// doc, "Numerics"): the state after a tick differs from a converged
	// integration by less than 1e-9, and the energy drift of a passive
	// stance is 8e-13 of the kinetic energy (the check allows 1e-9).
	DefaultSubSteps = 1
	// DefaultFallTorsoAngle is the torso angle from the vertical beyond
	// which a walker with a torso has fallen, rad: about 69° (our choice).
	// It is the value every scenario has run with since the schema began
	// (so no scenario's result changes with the plant's default), and it
	// declares the fall well before the trunk reaches the horizontal
	// (π/2), where on a bench the fall-arrest harness takes the load.
	DefaultFallTorsoAngle = 1.2
)

// Options choose how a Model integrates and what it does after contact
// events. The zero value gives the defaults noted on each field.
type Options struct {
	// SubSteps is the number of RK4 sub-steps per tick; 0 means
	// DefaultSubSteps (1: at a 1 kHz tick, one 1 ms step).
	SubSteps int
	// ContinueOnSlip lets a foot whose friction demand exceeds the static
	// limit slide with Coulomb friction; false stops the tick at the event.
	ContinueOnSlip bool
	// ContinueOnLiftOff lets a stance foot whose normal force would turn
	// negative leave the ground; false stops the tick at the event.
	ContinueOnLiftOff bool
	// IgnoreScuff lets a swing foot pass through the ground mid-swing (as
	// the simplest walking model assumes); false turns a scuff into an
	// impact of that foot.
	IgnoreScuff bool
	// FallHipHeight: the walker has fallen when the hip is closer than this
	// to the terrain below it, m; 0 means half the shorter leg length;
	// negative disables the check.
	FallHipHeight float64
	// FallTorsoAngle: with a torso, the walker has fallen when |θ_torso|
	// exceeds this, rad; 0 means DefaultFallTorsoAngle (1.2); negative
	// disables the check.
	FallTorsoAngle float64
	// MinStride: a swing-foot touchdown counts as a heel strike only when
	// its contact point is ahead of the stance foot's by more than this
	// along the terrain, m; 0 means 0.1 × the mean leg length.
	MinStride float64
}

func (o Options) validate() error {
	switch {
	case o.SubSteps < 0 || o.SubSteps > 10000:
		return perr("Options.SubSteps", float64(o.SubSteps), "must be between 0 (default %d) and 10000", DefaultSubSteps)
	case !finite(o.FallHipHeight):
		return perr("Options.FallHipHeight", o.FallHipHeight, "must be finite")
	case !finite(o.FallTorsoAngle):
		return perr("Options.FallTorsoAngle", o.FallTorsoAngle, "must be finite")
	case !finite(o.MinStride) || o.MinStride < 0:
		return perr("Options.MinStride", o.MinStride, "must be finite and ≥ 0 (0 = default)")
	}
	return nil
}

// DemoParams returns a demonstration walker of this project's own choosing
// (not a model of any person or product): a 10 kg hip, 0.9 m legs of 3 kg
// with feet of radius 0.27 m (0.3 × leg length, near the human roll-over
// shape radius, Hansen, Childress, Knox 2004, J. Biomech. 37:1467–1474,
// from memory), a 15 kg torso, on 200 m of level ground with μ_s = 0.8 and
// μ_k = 0.6.
func DemoParams() Params {
	leg := Leg{Length: 0.9, Mass: 3, COMDist: 0.35, Inertia: 0.15, FootRadius: 0.27}
	return Params{
		HipMass: 10,
		Legs:    [2]Leg{leg, leg},
		Torso:   &Torso{Mass: 15, COMDist: 0.3, Inertia: 0.6},
		Gravity: 9.81,
		Terrain: Terrain{Start: [2]float64{-5, 0}, Segments: []Segment{
			{Length: 200, Slope: 0, MuStatic: 0.8, MuKinetic: 0.6},
		}},
	}
}

package plant

// ContactMode is the state of one foot's contact with the ground.
type ContactMode uint8

// Contact modes. The zero value is Free.
const (
	Free    ContactMode = iota // the foot is off the ground
	Rolling                    // stuck: rolls on its arc without slipping
	Sliding                    // slides with Coulomb kinetic friction
)

// String returns the mode as a lower-case word.
func (c ContactMode) String() string {
	switch c {
	case Free:
		return "free"
	case Rolling:
		return "rolling"
	case Sliding:
		return "sliding"
	}
	return "unknown"
}

// EventKind names what happened at a plant event.
type EventKind uint8

// Event kinds. Value and Limit of an Event carry the numbers noted here.
const (
	// HeelStrike: the swing foot landed ahead of the stance foot and the
	// stance role swapped. Value = |Λ_t|/Λ_n of the impulse, Limit = μ_s,
	// EnergyLost = kinetic energy lost in the impact (J).
	HeelStrike EventKind = iota + 1
	// Touchdown: a free foot other than a heel-strike landing made an
	// impact (a scuff that is not ignored, or landing after flight). Same
	// fields as HeelStrike; the stance role does not change.
	Touchdown
	// ImpactSlip: the impact impulse would leave the friction cone
	// (|Λ_t| > μ_s Λ_n); it was resolved on the cone boundary. Value =
	// |Λ_t|/Λ_n demanded, Limit = μ_s. A knee strike's impulse on a foot
	// in contact is checked the same way (the impact_slip follows its
	// knee_strike).
	ImpactSlip
	// FrictionLimit: a rolling foot demands more friction than the static
	// limit. Value = utilization |F_t|/(μ_s N), Limit = μ_s.
	FrictionLimit
	// LiftOff: the stance foot's normal force would turn negative (the
	// ground would have to pull). Value = N (N), Limit = 0.
	LiftOff
	// ToeOff: the trailing foot of a double support left the ground, a
	// normal part of walking. Value = N, Limit = 0.
	ToeOff
	// Stick: a sliding foot stopped slipping and rolls again. Value = N.
	Stick
	// Scuff: the swing foot touched the ground mid-swing, behind the
	// heel-strike stride. Value = stride along the terrain (m), Limit =
	// Options.MinStride.
	Scuff
	// Fall: hip too low (Value = hip height above the terrain, Limit =
	// Options.FallHipHeight) or torso beyond its limit (Foot = −1, Value =
	// torso angle, Limit = Options.FallTorsoAngle).
	Fall
	// Chatter: more events than one tick may hold (contact chatter); the
	// tick stopped early. Value = number of events.
	Chatter
	// NonFinite: the state or a contact force became NaN or infinite; the
	// state was restored to the last finite one.
	NonFinite
	// BadInput: the tick's input or step size was unusable (NaN torque,
	// dt ≤ 0); the state was left unchanged. Value = the bad number.
	BadInput
	// KneeStrike: an unlocked knee reached its stop with a closing rate
	// and locked in a plastic impulse (solved with the feet in contact).
	// Foot = the leg, Value = the knee's closing rate before (rad/s),
	// EnergyLost = kinetic energy lost (J). An impact_slip follows if the
	// impulse on a foot in contact leaves its friction cone.
	KneeStrike
	// KneeUnlock: the stop of a locked knee whose latch is not engaged
	// would have to pull, so the knee left its stop: a swing knee, or a
	// knee with a latch that ReleaseKneeLatch released (on the ground or
	// not). Foot = the leg, Value = the lock torque (N·m, ≤ 0), Limit = 0.
	KneeUnlock
	// KneeBuckle: as KneeUnlock for a leg without a latch whose foot is on
	// the ground: the
	// stance knee buckles. The simulation continues with the knee free.
	KneeBuckle
)

// String returns the event kind as lower-case words joined by '_'.
func (k EventKind) String() string {
	switch k {
	case HeelStrike:
		return "heel_strike"
	case Touchdown:
		return "touchdown"
	case ImpactSlip:
		return "impact_slip"
	case FrictionLimit:
		return "friction_limit"
	case LiftOff:
		return "lift_off"
	case ToeOff:
		return "toe_off"
	case Stick:
		return "stick"
	case Scuff:
		return "scuff"
	case Fall:
		return "fall"
	case NonFinite:
		return "non_finite"
	case Chatter:
		return "chatter"
	case BadInput:
		return "bad_input"
	case KneeStrike:
		return "knee_strike"
	case KneeUnlock:
		return "knee_unlock"
	case KneeBuckle:
		return "knee_buckle"
	}
	return "unknown"
}

// MaxEvents is the number of events one TickResult can hold; more are
// counted in TickResult.Dropped.
const MaxEvents = 8

// Event is one plant event inside a tick.
type Event struct {
	Kind       EventKind // what happened; it says what Value and Limit hold
	T          float64   // simulated time of the event, s (located inside the tick)
	Foot       int       // 0 left, 1 right, −1 none
	Segment    int       // terrain segment index, −1 none
	Value      float64   // see EventKind
	Limit      float64   // see EventKind
	EnergyLost float64   // J, impacts only
}

// FootContact is the contact record of one foot at the end of a tick.
type FootContact struct {
	Mode        ContactMode // free, rolling or sliding at the end of the tick
	Normal      float64     // N: normal force of the ground on the foot (0 when free)
	Tangential  float64     // F_t along the terrain tangent, N (positive forward along the slope)
	Utilization float64     // |F_t|/(μ_s N); +Inf when N ≤ 0 with F_t ≠ 0
	CoP         float64     // centre of pressure: arc length along the foot from the point under the leg axis, m, positive toward the toe
	Gap         float64     // distance from the arc to the terrain, m (negative = penetration)
	SlipVel     float64     // tangential velocity of the foot's material point at the contact, m/s
	Segment     int         // index of the terrain segment nearest the foot
	Point       [2]float64  // contact point (closest terrain point to the arc), m
	// KneeTorque is the torque the knee stop of this leg's locked knee
	// applies, N·m: positive while it holds the knee against
	// hyperextension; 0 for an unlocked knee or a straight leg.
	KneeTorque float64
}

// TickResult is everything Step reports about one tick.
type TickResult struct {
	Contacts  [2]FootContact   // each foot's contact at the end of the tick, left first
	Events    [MaxEvents]Event // the tick's events in time order; only the first NumEvents are set
	NumEvents int              // how many of Events are set (a fixed array keeps Step allocation-free)
	Dropped   int              // events that did not fit in Events
	Stopped   bool             // a stopping event happened; the state is at that event
}

func (r *TickResult) add(e Event) {
	if r.NumEvents < MaxEvents {
		r.Events[r.NumEvents] = e
		r.NumEvents++
		return
	}
	r.Dropped++
}

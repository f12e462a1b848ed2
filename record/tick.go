package record

import (
	"strconv"
	"strings"
)

//go:generate go test -run ^TestReferencePage$ -update

// This file is the one home of the telemetry row: the Tick type and the
// column table that the CSV writer and reader, the Parquet export and the
// reference page docs/run-folder.md are all driven from. To add a column,
// add a line to tickFields (and, when the value is not derived from fields
// the row already has, a field to Tick and the line that fills it in
// hil/tick.go), then run go generate ./record.

// Foot is the contact of one foot in a telemetry row.
type Foot struct {
	Mode        int     // contact mode code; Manifest.FootModes names it
	NormalN     float64 // normal ground force, N
	TangentialN float64 // tangential (friction) ground force, N
	Utilization float64 // friction the gait demanded: |F_t| / (μ_s N) of a rolling foot, the impulse ratio / μ_s at an impact; 0 when not in contact
	Slip        bool    // the foot slid this tick: sliding contact, an impact outside the friction cone or a friction limit crossed
	CoP         float64 // centre of pressure along the foot arc, m from the arc's lowest point with the leg vertical
	ContactX    float64 // x of the contact point, m
	// KneeLocked is true while this leg's knee is locked at its stop (a
	// kneed walker only).
	KneeLocked bool
	// KneeTorqueNM is the torque the locked knee's stop (or latch) applies,
	// N·m: positive while it holds the knee against hyperextension,
	// negative when a latch pulls; 0 for an unlocked knee or a straight
	// leg (plant.FootContact.KneeTorque).
	KneeTorqueNM float64
}

// Tick is one telemetry row. Rows have fixed-size arrays so writing one
// allocates nothing; the manifest says how many entries are in use.
type Tick struct {
	Index     int64              // tick number from 0
	T         float64            // simulated time, s
	WallS     float64            // wall-clock time since Manifest.StartTime, s
	Q         [MaxQ]float64      // generalized coordinates
	V         [MaxQ]float64      // generalized velocities
	Angle     [MaxJoints]float64 // joint angles as sensed (after the sensor model), rad
	Rate      [MaxJoints]float64 // joint rates as sensed, rad/s
	Commanded [MaxJoints]float64 // torques the firmware commanded, N·m
	Applied   [MaxJoints]float64 // torques applied to the plant (after limits and lag), N·m
	Push      [2]float64         // push force on the hip (x, y), N
	Feet      [2]Foot            // left, right
	Kinetic   float64            // kinetic energy, J
	Potential float64            // potential energy, J
	LatencyUS float64            // command round-trip latency, µs; NaN when no fresh command
	Fresh     bool               // a fresh command arrived for this tick
	Stance    int                // stance leg: 0 left, 1 right
	BeltSpeed float64            // treadmill belt speed at the end of the tick, m/s, positive backward; 0 without a belt
	BeltPos   float64            // hip distance from the belt's rear end along the belt, m; NaN without a belt
}

// Kind says how the values of a column are written and stored.
type Kind uint8

// Column kinds.
const (
	// Real is a float64, written in the shortest form that parses back to
	// the same bits; NaN and ±Inf as NaN, +Inf, -Inf.
	Real Kind = iota
	// Count is a whole number that can grow with the run (the tick
	// number); int64 in Parquet.
	Count
	// Code is a small whole number naming a state (a contact mode, a
	// stance leg); int32 in Parquet.
	Code
	// Flag is 1 or 0; boolean in Parquet.
	Flag
)

// String names the kind for the reference page.
func (k Kind) String() string {
	switch k {
	case Real:
		return "real"
	case Count:
		return "count"
	case Code:
		return "code"
	case Flag:
		return "flag"
	}
	return "kind(" + strconv.Itoa(int(k)) + ")"
}

// Column describes one column of telemetry.csv or steps.csv.
//
// Names follow one scheme: the quantity, then what it belongs to (a hip,
// link, joint or foot), then the unit as in scenario files (`_m`, `_rad`,
// `_radps`, `_mps`, `_n`, `_nm`, `_j`, `_s`, `_us`); dimensionless
// numbers, codes and flags have no unit suffix. Examples: x_hip_m,
// theta_left_rad, omega_torso_radps, angle_hip_left_rad,
// tau_cmd_hip_left_nm, normal_right_n, utilization_left.
type Column struct {
	Name string // the header word
	Unit string // SI unit; empty for dimensionless numbers, codes and flags
	Kind Kind   // how the value is written and stored
	Doc  string // what the value is, in a sentence
	// V1Name is the column's header word in run folders of schema 1;
	// empty for a column schema 1 did not have.
	V1Name string
}

// field is a Column of rows of type R with the code that takes its value
// from a row and puts it back. A derived column (computed from other
// columns of the row) has no setter: reading it back checks only that it
// is a number.
type field[R any] struct {
	Column
	real     func(r *R) float64 // Real columns
	setReal  func(r *R, v float64)
	whole    func(r *R) int64 // Count, Code and Flag columns
	setWhole func(r *R, v int64)
}

// table collects the fields of one file in order.
type table[R any] []field[R]

func (t *table[R]) real(name, unit, v1, doc string, get func(*R) float64, set func(*R, float64)) {
	*t = append(*t, field[R]{Column: Column{Name: name, Unit: unit, Kind: Real, Doc: doc, V1Name: v1}, real: get, setReal: set})
}

func (t *table[R]) whole(kind Kind, name, v1, doc string, get func(*R) int64, set func(*R, int64)) {
	*t = append(*t, field[R]{Column: Column{Name: name, Kind: kind, Doc: doc, V1Name: v1}, whole: get, setWhole: set})
}

func bit(v bool) int64 {
	if v {
		return 1
	}
	return 0
}

// FootNames are the words for foot index 0 and 1 in column names and events.
var FootNames = [2]string{"left", "right"}

// linkNames are the plant's links in the order of their absolute angles
// q2, q3, …: leg 0 (left), leg 1 (right), then the torso if present, then
// the shanks of kneed legs, left first (see the plant conventions in
// DEVELOPERS.md). A kneed leg's own link is its thigh. A one-leg model has
// only the left leg, a compass walker no torso.
type linkLayout struct {
	names []string // link of coordinate 2+i
	thigh [2]int   // coordinate of leg i's thigh, when kneed
	shank [2]int   // coordinate of leg i's shank; -1 for a straight leg
}

// layoutOf gives the links of a walker with numQ coordinates. p, when not
// nil, says which legs have shanks and whether there is a torso; without
// it the layouts a scenario can describe are assumed: no knees up to five
// coordinates (one leg, compass, torso walker), both legs kneed at six
// (compass) and seven (torso).
func layoutOf(numQ int, p *Plant) linkLayout {
	l := linkLayout{shank: [2]int{-1, -1}}
	var kneed [2]bool
	torso := numQ == 5 || numQ == 7
	legs := min(max(numQ-2, 0), 2)
	if p != nil {
		torso = p.Torso != nil && !p.OneLeg
		for i := range kneed {
			kneed[i] = p.Legs[i].Shank != nil && (i == 0 || !p.OneLeg)
		}
		if p.OneLeg {
			legs = 1
		}
	} else if numQ >= 6 {
		kneed = [2]bool{true, true}
	}
	for i := 0; i < legs; i++ {
		if kneed[i] {
			l.names = append(l.names, "thigh_"+FootNames[i])
		} else {
			l.names = append(l.names, FootNames[i])
		}
	}
	if torso {
		l.names = append(l.names, "torso")
	}
	for i := 0; i < legs; i++ {
		if kneed[i] {
			l.thigh[i] = 2 + i
			l.shank[i] = 2 + len(l.names)
			l.names = append(l.names, "shank_"+FootNames[i])
		}
	}
	return l
}

// linkName names the link of generalized coordinate 2+i.
func (l *linkLayout) linkName(i int) string {
	if i < len(l.names) {
		return l.names[i]
	}
	return "link" + strconv.Itoa(i)
}

// tickFieldsOf is the telemetry column table of a run folder's manifest:
// its coordinates, joints and, from its plant record, which legs have
// knees.
func tickFieldsOf(m *Manifest) table[Tick] {
	return tickFieldsLayout(m.NumQ, m.JointNames, layoutOf(m.NumQ, m.Plant))
}

// tickFields is the telemetry column table for a walker with numQ
// generalized coordinates and the given joints, in file order.
func tickFields(numQ int, joints []string) table[Tick] {
	return tickFieldsLayout(numQ, joints, layoutOf(numQ, nil))
}

// tickFieldsLayout is tickFields with the links named by lay.
func tickFieldsLayout(numQ int, joints []string, lay linkLayout) table[Tick] {
	var c table[Tick]
	c.whole(Count, "tick", "tick", "tick number, from 0",
		func(t *Tick) int64 { return t.Index }, func(t *Tick, v int64) { t.Index = v })
	c.real("t_s", "s", "t_s", "simulated time at the end of the tick",
		func(t *Tick) float64 { return t.T }, func(t *Tick, v float64) { t.T = v })
	c.real("wall_s", "s", "wall_s", "wall-clock time since the manifest's start_time; 0 in lockstep, so lockstep files are identical run to run",
		func(t *Tick) float64 { return t.WallS }, func(t *Tick, v float64) { t.WallS = v })

	// Generalized coordinates q = (x_hip, y_hip, θ_left, θ_right[, θ_torso])
	// and their velocities: the plant's state at the end of the tick.
	for i := 0; i < numQ; i++ {
		get := func(t *Tick) float64 { return t.Q[i] }
		set := func(t *Tick, v float64) { t.Q[i] = v }
		v1 := "q" + strconv.Itoa(i)
		switch i {
		case 0:
			c.real("x_hip_m", "m", v1, "hip x, forward (plant state, generalized coordinate q0)", get, set)
		case 1:
			c.real("y_hip_m", "m", v1, "hip y, up (q1)", get, set)
		default:
			l := lay.linkName(i - 2)
			c.real("theta_"+l+"_rad", "rad", v1, "absolute angle of the "+l+" link from the world vertical, counter-clockwise (q"+strconv.Itoa(i)+")", get, set)
		}
	}
	for i := 0; i < numQ; i++ {
		get := func(t *Tick) float64 { return t.V[i] }
		set := func(t *Tick, v float64) { t.V[i] = v }
		v1 := "v" + strconv.Itoa(i)
		switch i {
		case 0:
			c.real("vx_hip_mps", "m/s", v1, "hip velocity along x (dq0/dt)", get, set)
		case 1:
			c.real("vy_hip_mps", "m/s", v1, "hip velocity along y (dq1/dt)", get, set)
		default:
			l := lay.linkName(i - 2)
			c.real("omega_"+l+"_radps", "rad/s", v1, "angular velocity of the "+l+" link (dq"+strconv.Itoa(i)+"/dt)", get, set)
		}
	}

	// Per joint, in the manifest's joint_names order.
	for j, name := range joints {
		c.real("angle_"+name+"_rad", "rad", "angle_"+name, "joint angle "+name+" as the firmware was sent it at the tick's start (after the sensor model: quantization, noise, bias, faults)",
			func(t *Tick) float64 { return t.Angle[j] }, func(t *Tick, v float64) { t.Angle[j] = v })
	}
	for j, name := range joints {
		c.real("rate_"+name+"_radps", "rad/s", "rate_"+name, "joint rate "+name+" as the firmware was sent it",
			func(t *Tick) float64 { return t.Rate[j] }, func(t *Tick, v float64) { t.Rate[j] = v })
	}
	for j, name := range joints {
		c.real("tau_cmd_"+name+"_nm", "N·m", "cmd_"+name, "torque at joint "+name+" the firmware commanded (the command held over this tick)",
			func(t *Tick) float64 { return t.Commanded[j] }, func(t *Tick, v float64) { t.Commanded[j] = v })
	}
	for j, name := range joints {
		c.real("tau_applied_"+name+"_nm", "N·m", "torque_"+name, "torque at joint "+name+" applied to the plant over this tick (after limits and actuator lag); a replay steps the plant with it",
			func(t *Tick) float64 { return t.Applied[j] }, func(t *Tick, v float64) { t.Applied[j] = v })
	}

	// Knees, per kneed leg: the true knee angle and rate from the plant
	// state (derived from the link columns; a sensed knee joint has its
	// own angle_knee_… column), whether the knee is locked and the torque
	// its stop or latch holds it with.
	for k, f := range FootNames {
		th, sh := lay.thigh[k], lay.shank[k]
		if sh < 0 || sh >= numQ {
			continue
		}
		c.real("theta_knee_"+f+"_rad", "rad", "", "knee angle of the "+f+" leg, θ_shank − θ_thigh from the plant state: 0 straight, negative flexed; the stop is at the manifest's shank stop_rad, 0 unless set (derived from the theta columns)",
			func(t *Tick) float64 { return t.Q[sh] - t.Q[th] }, nil)
		c.real("omega_knee_"+f+"_radps", "rad/s", "", "knee rate of the "+f+" leg, ω_shank − ω_thigh (derived from the omega columns)",
			func(t *Tick) float64 { return t.V[sh] - t.V[th] }, nil)
		c.whole(Flag, "knee_locked_"+f, "", "1 while the "+f+" knee is locked at its stop (held by the stop, or by its latch)",
			func(t *Tick) int64 { return bit(t.Feet[k].KneeLocked) }, func(t *Tick, v int64) { t.Feet[k].KneeLocked = v != 0 })
		c.real("knee_lock_torque_"+f+"_nm", "N·m", "", "torque the "+f+" knee's stop or latch applies to hold it: positive while the stop pushes against hyperextension; negative only with a latch (a knee without one would buckle, the knee_buckle alarm); 0 while unlocked",
			func(t *Tick) float64 { return t.Feet[k].KneeTorqueNM }, func(t *Tick, v float64) { t.Feet[k].KneeTorqueNM = v })
	}

	c.real("push_x_n", "N", "push_x_n", "push force on the hip along x (fault injection, plus the pull of a fall-arrest harness rope when one is set), held over the tick",
		func(t *Tick) float64 { return t.Push[0] }, func(t *Tick, v float64) { t.Push[0] = v })
	c.real("push_y_n", "N", "push_y_n", "push force on the hip along y",
		func(t *Tick) float64 { return t.Push[1] }, func(t *Tick, v float64) { t.Push[1] = v })

	// Per foot, left then right.
	for k, f := range FootNames {
		c.whole(Code, "mode_"+f, f+"_mode", "contact mode code of the "+f+" foot; the manifest's foot_modes names it (0 free, 1 rolling, 2 sliding)",
			func(t *Tick) int64 { return int64(t.Feet[k].Mode) }, func(t *Tick, v int64) { t.Feet[k].Mode = int(v) })
		c.real("normal_"+f+"_n", "N", f+"_normal_n", "normal ground force on the "+f+" foot",
			func(t *Tick) float64 { return t.Feet[k].NormalN }, func(t *Tick, v float64) { t.Feet[k].NormalN = v })
		c.real("tangential_"+f+"_n", "N", f+"_tangential_n", "tangential (friction) ground force on the "+f+" foot, along the ground",
			func(t *Tick) float64 { return t.Feet[k].TangentialN }, func(t *Tick, v float64) { t.Feet[k].TangentialN = v })
		c.real("utilization_"+f, "", f+"_utilization", "friction the gait demanded of the "+f+" foot: |F_t| / (μ_s N) while it rolls, and at a tick with its heel strike the larger of that and the impulse ratio |Λ_t| / Λ_n over μ_s; a sliding foot shows μ_k / μ_s (see slip_"+f+"); 0 when not in contact, +Inf when it would need friction with N ≤ 0",
			func(t *Tick) float64 { return t.Feet[k].Utilization }, func(t *Tick, v float64) { t.Feet[k].Utilization = v })
		c.whole(Flag, "slip_"+f, "", "1 when the "+f+" foot slid this tick (sliding contact, a heel strike outside the friction cone, or the friction limit crossed), for shading slip episodes; the summary's peak utilization counts such a tick as at least 1",
			func(t *Tick) int64 { return bit(t.Feet[k].Slip) }, func(t *Tick, v int64) { t.Feet[k].Slip = v != 0 })
		c.real("cop_"+f+"_m", "m", f+"_cop_m", "centre of pressure of the "+f+" foot: arc length from the point under the leg axis, positive toward the toe",
			func(t *Tick) float64 { return t.Feet[k].CoP }, func(t *Tick, v float64) { t.Feet[k].CoP = v })
		c.real("contact_x_"+f+"_m", "m", f+"_contact_x_m", "x of the terrain point closest to the "+f+" foot arc",
			func(t *Tick) float64 { return t.Feet[k].ContactX }, func(t *Tick, v float64) { t.Feet[k].ContactX = v })
	}

	c.real("energy_kinetic_j", "J", "kinetic_j", "kinetic energy of the walker at the end of the tick",
		func(t *Tick) float64 { return t.Kinetic }, func(t *Tick, v float64) { t.Kinetic = v })
	c.real("energy_potential_j", "J", "potential_j", "gravitational potential energy of the walker (zero at y = 0)",
		func(t *Tick) float64 { return t.Potential }, func(t *Tick, v float64) { t.Potential = v })
	// Derived: the sum of the two columns before it, so a reader need not
	// add them; it has no setter and no Tick field of its own.
	c.real("energy_total_j", "J", "", "total mechanical energy of the walker, energy_kinetic_j + energy_potential_j (derived: not stored separately, computed when written)",
		func(t *Tick) float64 { return t.Kinetic + t.Potential }, nil)

	c.real("latency_us", "µs", "latency_us", "command round trip of the command used this tick (wall-clock runs); empty (NaN) in lockstep and when no fresh command arrived",
		func(t *Tick) float64 { return t.LatencyUS }, func(t *Tick, v float64) { t.LatencyUS = v })
	c.whole(Flag, "fresh", "fresh", "1 when a fresh command arrived for this tick, 0 when the last torque was held",
		func(t *Tick) int64 { return bit(t.Fresh) }, func(t *Tick, v int64) { t.Fresh = v != 0 })
	c.whole(Code, "stance", "stance", "stance leg: 0 left, 1 right",
		func(t *Tick) int64 { return int64(t.Stance) }, func(t *Tick, v int64) { t.Stance = int(v) })
	c.real("belt_speed_mps", "m/s", "", "treadmill belt speed at the end of the tick, positive when the surface runs backward; 0 on fixed ground",
		func(t *Tick) float64 { return t.BeltSpeed }, func(t *Tick, v float64) { t.BeltSpeed = v })
	c.real("belt_position_m", "m", "", "hip distance from the belt's rear end, along the belt (the walker's place on the treadmill); NaN without a belt",
		func(t *Tick) float64 { return t.BeltPos }, func(t *Tick, v float64) { t.BeltPos = v })
	return c
}

// TickColumns returns the telemetry columns for numQ generalized
// coordinates and the given joints, in file order. The reference page
// docs/run-folder.md lists them with their units.
func TickColumns(numQ int, joints []string) []Column {
	return columnsOf(tickFields(numQ, joints))
}

func columnsOf[R any](t table[R]) []Column {
	out := make([]Column, len(t))
	for i := range t {
		out[i] = t[i].Column
	}
	return out
}

// names lists the header words of the columns of a schema version:
// current names for SchemaVersion, V1Name for schema 1 (columns schema 1
// did not have are left out).
func (t table[R]) names(version int) []string {
	out := make([]string, 0, len(t))
	for i := range t {
		switch {
		case version >= 2:
			out = append(out, t[i].Name)
		case t[i].V1Name != "":
			out = append(out, t[i].V1Name)
		}
	}
	return out
}

// inVersion returns the fields present in files of a schema version, in
// file order.
func (t table[R]) inVersion(version int) table[R] {
	if version >= 2 {
		return t
	}
	var out table[R]
	for _, f := range t {
		if f.V1Name != "" {
			out = append(out, f)
		}
	}
	return out
}

// appendRow formats one row: the values in table order, comma separated,
// with a newline. It allocates nothing when b has room.
func appendRow[R any](b []byte, t table[R], r *R) []byte {
	for k := range t {
		f := &t[k]
		if k > 0 {
			b = append(b, ',')
		}
		if f.Kind == Real {
			b = appendFloat(b, f.real(r))
		} else {
			b = strconv.AppendInt(b, f.whole(r), 10)
		}
	}
	return append(b, '\n')
}

// parseRow reads the fields of one split line into r.
func parseRow[R any](f *fields, t table[R], r *R) error {
	for k := range t {
		c := &t[k]
		if c.Kind == Real {
			v := f.float(k)
			if c.setReal != nil {
				c.setReal(r, v)
			}
		} else {
			v := f.int(k)
			if c.setWhole != nil {
				c.setWhole(r, v)
			}
		}
	}
	return f.err
}

// stepFields is the steps.csv column table, in file order.
func stepFields() table[Step] {
	var c table[Step]
	same := func(name, unit, doc string, get func(*Step) float64, set func(*Step, float64)) {
		c.real(name, unit, name, doc, get, set)
	}
	c.whole(Count, "step", "step", "step number, from 1",
		func(s *Step) int64 { return int64(s.Index) }, func(s *Step, v int64) { s.Index = int(v) })
	c.whole(Code, "stance", "stance", "stance leg during the step: 0 left, 1 right",
		func(s *Step) int64 { return int64(s.Stance) }, func(s *Step, v int64) { s.Stance = int(v) })
	same("start_s", "s", "simulated time of the heel strike that began the step",
		func(s *Step) float64 { return s.StartS }, func(s *Step, v float64) { s.StartS = v })
	same("end_s", "s", "simulated time of the heel strike that ended it",
		func(s *Step) float64 { return s.EndS }, func(s *Step, v float64) { s.EndS = v })
	same("duration_s", "s", "end_s − start_s",
		func(s *Step) float64 { return s.DurationS }, func(s *Step, v float64) { s.DurationS = v })
	same("length_m", "m", "forward distance between the two contact points",
		func(s *Step) float64 { return s.LengthM }, func(s *Step, v float64) { s.LengthM = v })
	same("speed_mps", "m/s", "length_m / duration_s",
		func(s *Step) float64 { return s.SpeedMPS }, func(s *Step, v float64) { s.SpeedMPS = v })
	same("peak_utilization", "", "peak friction utilization |F_t| / (μ_s N) of the stance foot",
		func(s *Step) float64 { return s.PeakUtilization }, func(s *Step, v float64) { s.PeakUtilization = v })
	same("min_normal_n", "N", "least normal force of the stance foot",
		func(s *Step) float64 { return s.MinNormalN }, func(s *Step, v float64) { s.MinNormalN = v })
	same("impact_loss_j", "J", "kinetic energy lost at the heel strike that ended the step",
		func(s *Step) float64 { return s.ImpactLossJ }, func(s *Step, v float64) { s.ImpactLossJ = v })
	same("pos_work_j", "J", "positive actuator work over the step",
		func(s *Step) float64 { return s.PosWorkJ }, func(s *Step, v float64) { s.PosWorkJ = v })
	same("neg_work_j", "J", "negative actuator work over the step (≤ 0)",
		func(s *Step) float64 { return s.NegWorkJ }, func(s *Step, v float64) { s.NegWorkJ = v })
	same("cost_of_transport", "", "positive work / (weight × length)",
		func(s *Step) float64 { return s.CostOfTransport }, func(s *Step, v float64) { s.CostOfTransport = v })
	same("cop_travel_m", "m", "centre-of-pressure travel along the stance foot arc, heel to toe",
		func(s *Step) float64 { return s.CoPTravelM }, func(s *Step, v float64) { s.CoPTravelM = v })
	p := func(name, doc string, get func(*Pose) *float64) {
		same(name, "m", doc+" at the heel strike that ended the step (stick figure)",
			func(s *Step) float64 { return *get(&s.Pose) }, func(s *Step, v float64) { *get(&s.Pose) = v })
	}
	p("hip_x_m", "hip x", func(p *Pose) *float64 { return &p.Hip[0] })
	p("hip_y_m", "hip y", func(p *Pose) *float64 { return &p.Hip[1] })
	p("left_foot_x_m", "x of the bottom of the left foot", func(p *Pose) *float64 { return &p.Feet[0][0] })
	p("left_foot_y_m", "y of the bottom of the left foot", func(p *Pose) *float64 { return &p.Feet[0][1] })
	p("right_foot_x_m", "x of the bottom of the right foot", func(p *Pose) *float64 { return &p.Feet[1][0] })
	p("right_foot_y_m", "y of the bottom of the right foot", func(p *Pose) *float64 { return &p.Feet[1][1] })
	c.whole(Flag, "has_torso", "has_torso", "1 when the walker has a torso (the torso_top columns mean something)",
		func(s *Step) int64 { return bit(s.Pose.HasTorso) }, func(s *Step, v int64) { s.Pose.HasTorso = v != 0 })
	p("torso_top_x_m", "x of the top of the torso", func(p *Pose) *float64 { return &p.TorsoTop[0] })
	p("torso_top_y_m", "y of the top of the torso", func(p *Pose) *float64 { return &p.TorsoTop[1] })
	return c
}

// stepTable is built once: steps.csv has the same columns in every run.
var stepTable = stepFields()

// StepColumns returns the columns of steps.csv, in file order.
func StepColumns() []Column { return columnsOf(stepTable) }

// StateColumns names the telemetry columns of the generalized coordinates
// (q) and velocities (v) of a walker with numQ coordinates, in the plant's
// order, so a message about coordinate i can use the name a person finds
// in telemetry.csv.
func StateColumns(numQ int) (q, v []string) {
	for _, c := range columnsOf(tickFields(numQ, nil)) {
		if len(c.V1Name) < 2 || strings.TrimLeft(c.V1Name[1:], "0123456789") != "" {
			continue
		}
		switch c.V1Name[0] {
		case 'q':
			q = append(q, c.Name)
		case 'v':
			v = append(v, c.Name)
		}
	}
	return q, v
}

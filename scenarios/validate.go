package scenarios

import (
	"fmt"
	"maps"
	"math"
	"net/url"
	"regexp"
	"slices"
	"strings"

	"gaitrig/plant"
)

var (
	namePattern = regexp.MustCompile(`^[A-Za-z0-9][A-Za-z0-9_-]{0,63}$`)
	envPattern  = regexp.MustCompile(`^[A-Za-z_][A-Za-z0-9_]*$`)
)

// checker validates a decoded scenario and reports problems at the lines of
// the fields involved.
type checker struct {
	d *decoder
	s *Scenario
}

// at returns the position of path, or of its nearest given ancestor.
func (c *checker) at(path string) pos {
	for p := path; p != ""; {
		if q, ok := c.d.present[p]; ok {
			return q
		}
		i := strings.LastIndexAny(p, ".[")
		if i < 0 {
			break
		}
		p = p[:i]
	}
	return pos{1, 1}
}

// isBad reports whether path or one of its ancestors failed to decode, so
// its checks would only repeat that error.
func (c *checker) isBad(path string) bool {
	for p := path; p != ""; {
		if c.d.bad[p] {
			return true
		}
		i := strings.LastIndexAny(p, ".[")
		if i < 0 {
			break
		}
		p = p[:i]
	}
	return false
}

func (c *checker) has(path string) bool { _, ok := c.d.present[path]; return ok }

func (c *checker) errf(path, format string, a ...any) {
	c.d.add(c.at(path), path, format, a...)
}

// require reports a missing required field of the block at parent.
func (c *checker) require(parent, name, what string) bool {
	p := join(parent, name)
	if c.has(p) || c.isBad(p) {
		return true
	}
	where := parent
	if where == "" {
		where = "the top level"
	}
	c.d.add(c.at(parent), p, "missing required field %s in %s (%s)", name, where, what)
	return false
}

// num checks a number against a condition; allowed says what is allowed.
func (c *checker) num(path string, x float64, ok bool, allowed string) {
	if ok || c.isBad(path) {
		return
	}
	name := path[strings.LastIndexAny(path, ".")+1:]
	c.errf(path, "%s is out of range; allowed %s", withUnit(x, unitOf(path)), strings.ReplaceAll(allowed, "X", name))
}

func withUnit(x float64, unit string) string {
	s := fmt.Sprintf("%g", x)
	if unit != "" {
		s += " " + unit
	}
	return s
}

// oneOf checks a word against a list.
func (c *checker) oneOf(path, val string, allowed ...string) {
	if slices.Contains(allowed, val) || c.isBad(path) {
		return
	}
	c.errf(path, "%q is not allowed; allowed: %s", val, strings.Join(allowed, ", "))
}

// only reports fields given that do not apply (why says to what they apply).
func (c *checker) only(parent string, fields []string, why string) {
	for _, f := range fields {
		if p := join(parent, f); c.has(p) {
			c.errf(p, "%s applies only %s", f, why)
		}
	}
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

func (c *checker) validate() {
	s := c.s
	if c.require("", "name", "a short identifier") && !c.d.bad["name"] && !namePattern.MatchString(s.Name) {
		c.errf("name", "%q is not a valid name; allowed: 1 to 64 letters, digits, '-' and '_', starting with a letter or digit", s.Name)
	}
	c.plant()
	c.terrain()
	c.harness()
	c.initial()
	c.controller()
	c.clock()
	c.run()
	c.physics()
	c.sensors()
	c.actuators()
	for i := range s.Faults {
		c.fault(i)
	}
	c.alarms()
	c.criteria()
	c.margins()
}

func (c *checker) plant() {
	p := &c.s.Plant
	if !c.require("", "plant", "the walker") {
		return
	}
	c.num("plant.gravity_mps2", p.GravityMPS2, p.GravityMPS2 > 0 && p.GravityMPS2 <= 100, "0 < X ≤ 100")
	if c.require("plant", "hip_mass_kg", "point mass at the hip, kg") {
		c.num("plant.hip_mass_kg", p.HipMassKG, p.HipMassKG >= 0 && p.HipMassKG <= 1e4, "0 ≤ X ≤ 10000")
	}
	if !c.require("plant", "legs", "the leg both legs share") {
		return
	}
	if !c.require("plant.legs", "length_m", "hip to foot bottom, m") {
		return
	}
	base := p.Legs.Leg
	c.leg("plant.legs", base, base)
	for side, o := range map[string]*LegOverride{"left": p.Legs.Left, "right": p.Legs.Right} {
		if o == nil {
			continue
		}
		if o.Shank != nil && base.Shank == nil {
			c.errf("plant.legs."+side+".shank", "overrides a shank the legs do not have; give the shared shank in plant.legs.shank first")
			continue
		}
		c.leg("plant.legs."+side, applyOverride(base, o), base)
	}
	left, right := c.s.Leg(0), c.s.Leg(1) // with the per-side overrides
	total := p.HipMassKG + left.MassKG + right.MassKG
	for _, l := range []Leg{left, right} {
		if l.Shank != nil {
			total += l.Shank.MassKG
		}
	}
	if t := p.Torso; t != nil {
		if c.require("plant.torso", "mass_kg", "torso mass, kg") {
			c.num("plant.torso.mass_kg", t.MassKG, t.MassKG >= 0 && t.MassKG <= 1e4, "0 ≤ X ≤ 10000")
		}
		c.num("plant.torso.com_m", t.COMM, t.COMM >= 0 && t.COMM <= 10, "0 ≤ X ≤ 10")
		c.num("plant.torso.inertia_kgm2", t.InertiaKGM2, t.InertiaKGM2 >= 0 && t.InertiaKGM2 <= 1e4, "0 ≤ X ≤ 10000")
		if t.MassKG*t.COMM*t.COMM+t.InertiaKGM2 <= 0 && !c.d.bad["plant.torso"] {
			c.errf("plant.torso", "the torso has neither mass away from the hip nor inertia, so its angle would have no inertia; give com_m > 0 with mass_kg > 0, or inertia_kgm2 > 0")
		}
		total += t.MassKG
	}
	if total <= 0 && c.has("plant.hip_mass_kg") && p.HipMassKG >= 0 && left.MassKG >= 0 && right.MassKG >= 0 {
		c.errf("plant.hip_mass_kg", "the walker has no mass at all; give the hip, legs or torso a mass")
	}
}

// applyOverride returns the shared leg with one side's overrides applied.
func applyOverride(l Leg, o *LegOverride) Leg {
	set := func(dst *float64, src *float64) {
		if src != nil {
			*dst = *src
		}
	}
	if o != nil {
		set(&l.LengthM, o.LengthM)
		set(&l.MassKG, o.MassKG)
		set(&l.COMM, o.COMM)
		set(&l.InertiaKGM2, o.InertiaKGM2)
		set(&l.FootRadiusM, o.FootRadiusM)
		set(&l.ArcOffsetM, o.ArcOffsetM)
		if o.Shank != nil && l.Shank != nil {
			sh := *l.Shank
			set(&sh.LengthM, o.Shank.LengthM)
			set(&sh.MassKG, o.Shank.MassKG)
			set(&sh.COMM, o.Shank.COMM)
			set(&sh.InertiaKGM2, o.Shank.InertiaKGM2)
			set(&sh.KneeStopRad, o.Shank.KneeStopRad)
			if o.Shank.KneeActuated != nil {
				sh.KneeActuated = *o.Shank.KneeActuated
			}
			if o.Shank.KneeLatch != nil {
				sh.KneeLatch = *o.Shank.KneeLatch
			}
			l.Shank = &sh
		}
	}
	return l
}

// leg checks one effective leg; path is where its own values are given
// (plant.legs or plant.legs.left/right), shared is the shared block, whose
// values an override inherits.
func (c *checker) leg(path string, l, shared Leg) {
	// A value the override does not give comes from plant.legs: report it
	// there, unless the override changed something it depends on.
	where := func(name string) string {
		if c.has(join(path, name)) {
			return join(path, name)
		}
		return join("plant.legs", name)
	}
	c.num(where("length_m"), l.LengthM, l.LengthM > 0 && l.LengthM <= 10, "0 < X ≤ 10")
	c.num(where("mass_kg"), l.MassKG, l.MassKG >= 0 && l.MassKG <= 1e4, "0 ≤ X ≤ 10000")
	c.num(where("inertia_kgm2"), l.InertiaKGM2, l.InertiaKGM2 >= 0 && l.InertiaKGM2 <= 1e4, "0 ≤ X ≤ 10000")
	if !(l.LengthM > 0) {
		return
	}
	if path != "plant.legs" && l == shared {
		return
	}
	relational := func(name string, x float64, ok bool, msg string) {
		p := where(name)
		if ok || c.d.bad[p] {
			return
		}
		c.errf(p, "%s", msg)
	}
	relational("com_m", l.COMM, l.COMM >= 0 && l.COMM <= l.LengthM,
		fmt.Sprintf("%g m is outside the leg of length %g m; allowed 0 ≤ com_m ≤ length_m", l.COMM, l.LengthM))
	// The foot is fixed to the lowest link: the shank when the leg has a
	// knee, and its length bounds the foot.
	footLen, footName, footField := l.LengthM, "leg length", "length_m"
	if sh := l.Shank; sh != nil {
		if !c.shank(path, l, shared) {
			return
		}
		footLen, footName, footField = sh.LengthM, "shank length", "shank.length_m"
	}
	switch {
	case l.FootRadiusM < 0:
		relational("foot_radius_m", l.FootRadiusM, false,
			fmt.Sprintf("%g m is negative; allowed 0 ≤ foot_radius_m ≤ %s (0 is a point foot)", l.FootRadiusM, footField))
	case l.FootRadiusM > footLen:
		relational("foot_radius_m", l.FootRadiusM, false,
			fmt.Sprintf("%g m is larger than the %s %g m; allowed 0 ≤ foot_radius_m ≤ %s", l.FootRadiusM, footName, footLen, footField))
	}
	relational("arc_offset_m", l.ArcOffsetM, math.Abs(l.ArcOffsetM) <= footLen,
		fmt.Sprintf("%g m is larger than the %s %g m; allowed |arc_offset_m| ≤ %s", l.ArcOffsetM, footName, footLen, footField))
	switch {
	case l.MassKG < 0 || l.InertiaKGM2 < 0 || c.isBad(where("mass_kg")) || c.isBad(where("inertia_kgm2")):
		// already reported (out of range, or not a number)
	case l.Shank != nil:
		// The thigh angle has inertia from the shank's mass at the knee
		// as well; the plant checks that sum (a thigh of no mass and no
		// inertia on a shank with mass is a valid model).
		if l.MassKG*l.COMM*l.COMM+l.InertiaKGM2+l.Shank.MassKG*l.LengthM*l.LengthM <= 0 {
			c.errf(where("inertia_kgm2"), "the thigh and shank have no mass away from the hip and no inertia, so the thigh angle would have no inertia; give the thigh com_m > 0 or inertia_kgm2 > 0, or the shank a mass")
		}
	case l.MassKG == 0 && l.InertiaKGM2 == 0:
		c.errf(where("inertia_kgm2"), "a massless leg (mass_kg 0) needs inertia_kgm2 > 0, or its angle would have no inertia "+
			"and its swing would be undetermined; for the point-foot model approach the limit with a tiny mass at the foot "+
			"(for example mass_kg: 1e-8 with com_m equal to length_m and inertia_kgm2: 0)")
	case l.MassKG*l.COMM*l.COMM+l.InertiaKGM2 <= 0:
		c.errf(where("inertia_kgm2"), "the leg has neither mass away from the hip nor inertia, so its angle would have no inertia; give com_m > 0 or inertia_kgm2 > 0")
	}
}

// shank checks the shank of an effective leg l given at path (plant.legs
// or plant.legs.left/right); shared is the shared leg block. It returns
// false when the shank's length is unusable, so the foot cannot be checked
// against it.
func (c *checker) shank(path string, l, shared Leg) bool {
	sh := l.Shank
	sp := join(path, "shank")
	where := func(name string) string {
		if c.has(join(sp, name)) {
			return join(sp, name)
		}
		return join("plant.legs.shank", name)
	}
	if path == "plant.legs" && !c.require(sp, "length_m", "knee to foot bottom, m") {
		return false
	}
	c.num(where("mass_kg"), sh.MassKG, sh.MassKG >= 0 && sh.MassKG <= 1e4, "0 ≤ X ≤ 10000")
	c.num(where("inertia_kgm2"), sh.InertiaKGM2, sh.InertiaKGM2 >= 0 && sh.InertiaKGM2 <= 1e4, "0 ≤ X ≤ 10000")
	c.num(where("knee_stop_rad"), sh.KneeStopRad, math.Abs(sh.KneeStopRad) < math.Pi/2, "|X| < π/2 (1.5708)")
	if !c.has(where("length_m")) {
		return false // a missing shared length is reported once, in plant.legs.shank
	}
	c.num(where("length_m"), sh.LengthM, sh.LengthM > 0 && sh.LengthM <= 10, "0 < X ≤ 10")
	if !(sh.LengthM > 0) || c.isBad(where("length_m")) {
		return false
	}
	if p := where("com_m"); !(sh.COMM >= 0 && sh.COMM <= sh.LengthM) && !c.isBad(p) {
		c.errf(p, "%g m is outside the shank of length %g m; allowed 0 ≤ com_m ≤ length_m", sh.COMM, sh.LengthM)
	}
	bad := sh.MassKG < 0 || sh.InertiaKGM2 < 0 || c.isBad(where("mass_kg")) || c.isBad(where("inertia_kgm2"))
	if !bad && sh.MassKG*sh.COMM*sh.COMM+sh.InertiaKGM2 <= 0 {
		c.errf(where("inertia_kgm2"), "the shank has neither mass away from the knee nor inertia, so its angle would have no inertia; give com_m > 0 with mass_kg > 0, or inertia_kgm2 > 0")
	}
	return true
}

func (c *checker) terrain() {
	t := &c.s.Terrain
	if !c.require("", "terrain", "the ground") {
		return
	}
	c.num("terrain.start_m", t.StartM[0], finite(t.StartM[0]) && finite(t.StartM[1]) && math.Abs(t.StartM[0]) <= 1e6 && math.Abs(t.StartM[1]) <= 1e6, "|x|, |y| ≤ 1e6")
	if !c.require("terrain", "segments", "at least one piece of ground") {
		return
	}
	if len(t.Segments) == 0 && !c.d.bad["terrain.segments"] {
		c.errf("terrain.segments", "the list is empty; give at least one segment")
	}
	for i, g := range t.Segments {
		p := fmt.Sprintf("terrain.segments[%d]", i)
		if c.require(p, "length_m", "length along the surface, m") {
			c.num(p+".length_m", g.LengthM, g.LengthM > 0 && g.LengthM <= 1e5, "0 < X ≤ 100000")
		}
		c.num(p+".slope_rad", g.SlopeRad, math.Abs(g.SlopeRad) < math.Pi/2, "|X| < π/2 (1.5708)")
		if c.require(p, "mu_static", "static friction coefficient") {
			c.num(p+".mu_static", g.MuStatic, g.MuStatic > 0 && g.MuStatic <= 10, "0 < X ≤ 10")
		}
		if c.has(p+".mu_kinetic") && !c.d.bad[p+".mu_kinetic"] && !(g.MuKinetic >= 0 && g.MuKinetic <= g.MuStatic) {
			c.errf(p+".mu_kinetic", "%g is outside 0 … mu_static (%g); kinetic friction never exceeds static friction; allowed 0 ≤ mu_kinetic ≤ mu_static", g.MuKinetic, g.MuStatic)
		}
		if g.Belt != nil {
			c.belt(p+".belt", g.Belt, g.LengthM)
		}
	}
	first := -1
	for i, g := range t.Segments {
		if g.Belt == nil {
			continue
		}
		if first >= 0 {
			c.errf(fmt.Sprintf("terrain.segments[%d].belt", i), "a second belt (the first is terrain.segments[%d]); one treadmill belt per scenario", first)
			break
		}
		first = i
	}
}

// belt checks a treadmill belt block at path on a segment of length l.
func (c *checker) belt(p string, b *Belt, l float64) {
	n := 0
	for _, f := range []string{"speed_mps", "ramp", "points"} {
		if c.has(p + "." + f) {
			n++
		}
	}
	if n != 1 && !c.isBad(p) {
		c.errf(p, "a belt needs exactly one speed profile: speed_mps (constant), ramp or points; %d given", n)
	}
	if b.SpeedMPS != nil {
		c.num(p+".speed_mps", *b.SpeedMPS, math.Abs(*b.SpeedMPS) <= 20, "|X| ≤ 20")
	}
	if r := b.Ramp; r != nil {
		q := p + ".ramp"
		for _, f := range []string{"from_mps", "to_mps", "end_s"} {
			c.require(q, f, "the ramp's speeds (m/s) and end time (s)")
		}
		c.num(q+".from_mps", r.FromMPS, math.Abs(r.FromMPS) <= 20, "|X| ≤ 20")
		c.num(q+".to_mps", r.ToMPS, math.Abs(r.ToMPS) <= 20, "|X| ≤ 20")
		c.num(q+".start_s", r.StartS, r.StartS >= 0 && r.StartS <= 1e5, "0 ≤ X ≤ 100000")
		if c.has(q+".end_s") && !c.isBad(q+".end_s") && !(r.EndS > r.StartS && r.EndS <= 1e5) {
			c.errf(q+".end_s", "%g s is not after start_s (%g s); allowed start_s < end_s ≤ 100000", r.EndS, r.StartS)
		}
	}
	if c.has(p+".points") && !c.isBad(p+".points") && len(b.Points) == 0 {
		c.errf(p+".points", "the list is empty; give at least one {t_s, speed_mps}")
	}
	for i, pt := range b.Points {
		q := fmt.Sprintf("%s.points[%d]", p, i)
		c.require(q, "t_s", "time, s")
		c.require(q, "speed_mps", "belt speed, m/s")
		c.num(q+".t_s", pt.TS, pt.TS >= 0 && pt.TS <= 1e5, "0 ≤ X ≤ 100000")
		c.num(q+".speed_mps", pt.SpeedMPS, math.Abs(pt.SpeedMPS) <= 20, "|X| ≤ 20")
		if i > 0 && !c.isBad(q+".t_s") && !(pt.TS > b.Points[i-1].TS) {
			c.errf(q+".t_s", "%g s is not after the point before (%g s); times must increase strictly", pt.TS, b.Points[i-1].TS)
		}
	}
	for i, pu := range b.Pulses {
		q := fmt.Sprintf("%s.pulses[%d]", p, i)
		switch at, step := c.has(q+".at_s"), c.has(q+".at_step"); {
		case at && step:
			c.errf(q+".at_step", "a pulse starts at_s or at_step, not both")
		case !at && !step:
			c.errf(q, "a pulse needs at_s (a time) or at_step (a heel strike)")
		case at:
			c.num(q+".at_s", pu.AtS, pu.AtS >= 0 && pu.AtS <= 1e5, "0 ≤ X ≤ 100000")
			if c.has(q + ".phase") {
				c.errf(q+".phase", "phase applies only to a pulse at_step")
			}
		default:
			c.num(q+".at_step", float64(pu.AtStep), pu.AtStep >= 1, "X ≥ 1")
			c.num(q+".phase", pu.Phase, pu.Phase >= 0 && pu.Phase < 1, "0 ≤ X < 1")
		}
		if c.require(q, "delta_mps", "the change of belt speed, m/s") {
			c.num(q+".delta_mps", pu.DeltaMPS, pu.DeltaMPS != 0 && math.Abs(pu.DeltaMPS) <= 10, "0 < |X| ≤ 10")
		}
		if c.require(q, "rise_s", "the time to reach delta_mps, s") {
			c.num(q+".rise_s", pu.RiseS, pu.RiseS > 0 && pu.RiseS <= 10, "0 < X ≤ 10")
		}
		c.num(q+".hold_s", pu.HoldS, pu.HoldS >= 0 && pu.HoldS <= 3600, "0 ≤ X ≤ 3600")
		if c.has(q + ".fall_s") {
			// Left out, fall_s is rise_s, whose check speaks for it.
			c.num(q+".fall_s", pu.FallS, pu.FallS > 0 && pu.FallS <= 10, "0 < X ≤ 10")
		}
	}
	if b.StartM != nil {
		c.num(p+".start_m", *b.StartM, *b.StartM > 0 && *b.StartM < l, fmt.Sprintf("0 < X < the belt's length_m (%g)", l))
	}
	c.num(p+".end_margin_m", b.EndMarginM, b.EndMarginM > 0 && b.EndMarginM < l/2, fmt.Sprintf("0 < X < half the belt (%g m)", l/2))
}

// harness checks the fall-arrest harness block.
func (c *checker) harness() {
	h := c.s.Harness
	if h == nil {
		return
	}
	c.num("harness.anchor_height_m", h.AnchorHeightM, h.AnchorHeightM > 0 && h.AnchorHeightM <= 10, "0 < X ≤ 10")
	c.num("harness.drop_m", h.DropM, h.DropM > 0 && h.DropM <= 2, "0 < X ≤ 2")
	c.num("harness.stiffness_npm", h.StiffnessNPM, h.StiffnessNPM > 0 && h.StiffnessNPM <= 1e7, "0 < X ≤ 1e7")
	c.num("harness.damping_nspm", h.DampingNSPM, h.DampingNSPM >= 0 && h.DampingNSPM <= 1e6, "0 ≤ X ≤ 1e6")
}

func (c *checker) initial() {
	in := &c.s.Initial
	if !c.require("", "initial", "the initial state: natural_gait: true, or explicit leg angles") {
		return
	}
	c.oneOf("initial.stance", in.Stance, "left", "right")
	c.num("initial.x_m", in.XM, math.Abs(in.XM) <= 1e6, "|X| ≤ 1e6")
	// With natural_gait the angles are an optional guess for the gait
	// finder; without it they are the state itself.
	given := c.has("initial.leg_angles_rad") || c.isBad("initial.leg_angles_rad")
	if !in.NaturalGait {
		given = c.require("initial", "leg_angles_rad", "[left, right] leg angles from the vertical, rad, or natural_gait: true")
	}
	if given && !c.isBad("initial.leg_angles_rad") {
		if len(in.LegAnglesRad) != 2 {
			c.errf("initial.leg_angles_rad", "expected 2 numbers [left, right], got %d", len(in.LegAnglesRad))
		}
		for i, a := range in.LegAnglesRad {
			c.num(fmt.Sprintf("initial.leg_angles_rad[%d]", i), a, math.Abs(a) < math.Pi/2, "|angle| < π/2 (1.5708)")
		}
	}
	if c.has("initial.leg_rates_radps") && !c.d.bad["initial.leg_rates_radps"] {
		if len(in.LegRatesRadps) != 2 {
			c.errf("initial.leg_rates_radps", "expected 2 numbers [left, right], got %d", len(in.LegRatesRadps))
		}
		for i, a := range in.LegRatesRadps {
			c.num(fmt.Sprintf("initial.leg_rates_radps[%d]", i), a, math.Abs(a) <= 100, "|rate| ≤ 100")
		}
	}
	if c.s.Plant.Torso == nil {
		c.only("initial", []string{"torso_angle_rad", "torso_rate_radps"}, "to a walker with a torso (plant.torso)")
	} else {
		c.num("initial.torso_angle_rad", in.TorsoAngleRad, math.Abs(in.TorsoAngleRad) < math.Pi/2, "|X| < π/2 (1.5708)")
		c.num("initial.torso_rate_radps", in.TorsoRateRadps, math.Abs(in.TorsoRateRadps) <= 100, "|X| ≤ 100")
	}
}

func (c *checker) controller() {
	k := &c.s.Controller
	if !c.require("", "controller", "which controller drives the walker") {
		return
	}
	if !c.require("controller", "link", "builtin, serial, mqtt or none") {
		return
	}
	c.oneOf("controller.link", k.Link, LinkBuiltin, LinkSerial, LinkMQTT, LinkNone)
	owner := map[string]string{"mode": LinkBuiltin, "settings": LinkBuiltin, "port": LinkSerial, "baud": LinkSerial,
		"broker": LinkMQTT, "rig": LinkMQTT, "username_env": LinkMQTT, "password_env": LinkMQTT}
	for _, f := range []string{"mode", "settings", "port", "baud", "broker", "rig", "username_env", "password_env"} {
		if o := owner[f]; o != k.Link && c.has("controller."+f) && slices.Contains([]string{LinkBuiltin, LinkSerial, LinkMQTT, LinkNone}, k.Link) {
			c.errf("controller."+f, "%s applies only to link %s; this controller has link %s", f, o, k.Link)
		}
	}
	switch k.Link {
	case LinkBuiltin:
		c.oneOf("controller.mode", k.Mode, "walk", "passive")
		for name, v := range k.Settings {
			c.num("controller.settings."+name, v, finite(v), "a finite number")
		}
	case LinkSerial:
		if c.require("controller", "port", "the serial device, for example /dev/ttyUSB0") && k.Port == "" {
			c.errf("controller.port", "is empty; give the serial device, for example /dev/ttyUSB0")
		}
		c.num("controller.baud", float64(k.Baud), k.Baud >= 300 && k.Baud <= 20_000_000, "300 ≤ X ≤ 20000000")
	case LinkMQTT:
		if k.Broker != "embedded" && !c.d.bad["controller.broker"] {
			u, err := url.Parse(k.Broker)
			// The schemes the MQTT link dials (bridges/mqtt Config.Broker); a
			// scheme it refuses must fail here, with the line, not at run time.
			if err != nil || u.Host == "" || !slices.Contains([]string{"tcp", "ssl", "tls", "mqtt", "mqtts"}, u.Scheme) {
				c.errf("controller.broker", "%q is not a broker address; allowed: embedded, or a URL such as tcp://127.0.0.1:1883 (schemes tcp, ssl, tls, mqtt, mqtts)", k.Broker)
			} else if u.User != nil {
				c.errf("controller.broker", "the URL holds credentials; secrets never go in a scenario file: name environment variables with username_env and password_env")
			}
		}
		if !c.d.bad["controller.rig"] && !namePattern.MatchString(k.Rig) {
			c.errf("controller.rig", "%q is not a valid rig id; allowed: 1 to 64 letters, digits, '-' and '_' (it is one MQTT topic level)", k.Rig)
		}
		for _, f := range []string{"username_env", "password_env"} {
			v := k.UsernameEnv
			if f == "password_env" {
				v = k.PasswordEnv
			}
			if c.has("controller."+f) && !envPattern.MatchString(v) {
				c.errf("controller."+f, "%q is not an environment variable name; give the NAME of the variable that holds the secret (letters, digits, '_'), never the secret itself", v)
			}
		}
	}
}

func (c *checker) clock() {
	k := &c.s.Clock
	c.oneOf("clock.mode", k.Mode, ClockLockstep, ClockWallclock)
	c.num("clock.tick_hz", k.TickHz, k.TickHz >= 10 && k.TickHz <= 20000, "10 ≤ X ≤ 20000")
	c.num("clock.substeps", float64(k.Substeps), k.Substeps >= 1 && k.Substeps <= 100, "1 ≤ X ≤ 100")
	if c.s.Controller.Link == LinkNone && k.Mode == ClockWallclock && c.has("clock.mode") {
		c.errf("clock.mode", "wallclock needs a controller to pace against; link none runs in lockstep")
	}
	if k.TickHz >= 10 && k.TickHz <= 20000 && !c.d.bad["watchdog_ms"] {
		period := 1000 / k.TickHz
		if !c.has("watchdog_ms") && c.s.WatchdogMS < 2*period {
			c.errf("clock.tick_hz", "at %g Hz the default watchdog_ms (%g ms) is shorter than two ticks; set watchdog_ms ≥ %g", k.TickHz, c.s.WatchdogMS, 2*period)
			return
		}
		c.num("watchdog_ms", c.s.WatchdogMS, c.s.WatchdogMS >= 2*period && c.s.WatchdogMS <= 60000,
			fmt.Sprintf("2 ticks (%g ms at %g Hz) ≤ X ≤ 60000", 2*period, k.TickHz))
	}
}

func (c *checker) run() {
	r := &c.s.Run
	if !c.require("", "run", "how long the run lasts: duration_s, max_steps or both") {
		return
	}
	if !c.has("run.duration_s") && !c.has("run.max_steps") && !c.d.bad["run"] {
		c.errf("run", "the run has no end; give duration_s, max_steps or both")
	}
	if c.has("run.duration_s") {
		c.num("run.duration_s", r.DurationS, r.DurationS > 0 && r.DurationS <= 86400, "0 < X ≤ 86400")
	}
	if c.has("run.max_steps") {
		c.num("run.max_steps", float64(r.MaxSteps), r.MaxSteps > 0 && r.MaxSteps <= 1_000_000, "0 < X ≤ 1000000")
	}
}

func (c *checker) physics() {
	p := &c.s.Physics
	c.oneOf("physics.on_slip", p.OnSlip, PolicyContinue, PolicyStop)
	c.oneOf("physics.on_lift_off", p.OnLiftOff, PolicyContinue, PolicyStop)
	c.num("physics.fall_hip_height_m", p.FallHipHeightM, math.Abs(p.FallHipHeightM) <= 10, "|X| ≤ 10")
	c.num("physics.fall_torso_angle_rad", p.FallTorsoAngleRad, p.FallTorsoAngleRad > 0 && p.FallTorsoAngleRad <= math.Pi, "0 < X ≤ π (3.1416)")
}

func (c *checker) sensors() {
	s := &c.s.Sensors
	c.num("sensors.encoder_counts_per_rev", float64(s.EncoderCountsPerRev), s.EncoderCountsPerRev >= 0 && s.EncoderCountsPerRev <= 1<<24, "0 ≤ X ≤ 16777216 (0: no quantization)")
	for _, f := range []struct {
		name string
		x    float64
	}{{"angle_noise_rad", s.AngleNoiseRad}, {"rate_noise_radps", s.RateNoiseRadps}, {"imu_pitch_noise_rad", s.IMUPitchNoiseRad}, {"imu_rate_noise_radps", s.IMURateNoiseRadps}} {
		c.num("sensors."+f.name, f.x, f.x >= 0 && f.x <= 10, "0 ≤ X ≤ 10 (a standard deviation)")
	}
	for _, f := range []struct {
		name string
		x    float64
	}{{"angle_bias_rad", s.AngleBiasRad}, {"rate_bias_radps", s.RateBiasRadps}, {"imu_pitch_bias_rad", s.IMUPitchBiasRad}, {"imu_rate_bias_radps", s.IMURateBiasRadps}} {
		c.num("sensors."+f.name, f.x, math.Abs(f.x) <= 10, "|X| ≤ 10")
	}
	c.num("sensors.contact_threshold_n", s.ContactThresholdN, s.ContactThresholdN >= 0 && s.ContactThresholdN <= 1e5, "0 ≤ X ≤ 100000")
}

// JointNames returns the joint names of the scenario's walker, in the
// plant's order: hip for a compass walker, hip_left and hip_right with a
// torso, then knee_left and knee_right for actuated knees.
func (s *Scenario) JointNames() []string {
	names := []string{"hip"}
	if s.Plant.Torso != nil {
		names = []string{"hip_left", "hip_right"}
	}
	// Actuated knees follow the hips, left before right, as in
	// plant.Model.JointNames.
	for i, side := range [2]string{"left", "right"} {
		if sh := s.Leg(i).Shank; sh != nil && sh.KneeActuated {
			names = append(names, "knee_"+side)
		}
	}
	return names
}

func (c *checker) actuators() {
	a := &c.s.Actuators
	c.num("actuators.torque_limit_nm", a.TorqueLimitNM, a.TorqueLimitNM > 0 && a.TorqueLimitNM <= 1e4, "0 < X ≤ 10000")
	c.num("actuators.lag_s", a.LagS, a.LagS >= 0 && a.LagS <= 1, "0 ≤ X ≤ 1")
	joints := c.s.JointNames()
	for name, v := range a.JointTorqueLimitsNM {
		p := "actuators.joint_torque_limits_nm." + name
		if !slices.Contains(joints, name) {
			c.errf(p, "this walker has no joint %q; its joints are %s", name, strings.Join(joints, ", "))
			continue
		}
		c.num(p, v, v > 0 && v <= 1e4, "0 < limit ≤ 10000")
	}
}

// faultFields lists the fields that apply to each fault kind besides kind.
var faultFields = map[string][]string{
	FaultLatency: {"from_s", "until_s", "fixed_ms", "jitter_ms"},
	FaultDrop:    {"from_s", "until_s", "rate"},
	FaultCorrupt: {"from_s", "until_s", "rate"},
	FaultFreeze:  {"sensor", "at_s", "for_s"},
	FaultPush:    {"at_s", "at_step", "impulse_ns", "force_n", "duration_s"},
}

var allFaultFields = []string{"from_s", "until_s", "fixed_ms", "jitter_ms", "rate", "sensor", "at_s", "at_step", "for_s", "impulse_ns", "force_n", "duration_s"}

func (c *checker) fault(i int) {
	f := &c.s.Faults[i]
	p := fmt.Sprintf("faults[%d]", i)
	if !c.require(p, "kind", "latency, drop, corrupt, freeze or push") {
		return
	}
	allowed, ok := faultFields[f.Kind]
	if !ok {
		c.oneOf(p+".kind", f.Kind, FaultLatency, FaultDrop, FaultCorrupt, FaultFreeze, FaultPush)
		return
	}
	for _, name := range allFaultFields {
		if !slices.Contains(allowed, name) && c.has(p+"."+name) {
			c.errf(p+"."+name, "does not apply to a %s fault; allowed for %s: %s", f.Kind, f.Kind, strings.Join(allowed, ", "))
		}
	}
	window := func() {
		c.num(p+".from_s", f.FromS, f.FromS >= 0, "X ≥ 0")
		if c.has(p+".until_s") && !c.d.bad[p+".until_s"] && !(f.UntilS > f.FromS) {
			c.errf(p+".until_s", "%g s is not after from_s (%g s); allowed until_s > from_s, or leave it out for the end of the run", f.UntilS, f.FromS)
		}
	}
	switch f.Kind {
	case FaultLatency:
		window()
		c.num(p+".fixed_ms", f.FixedMS, f.FixedMS >= 0 && f.FixedMS <= 10000, "0 ≤ X ≤ 10000")
		c.num(p+".jitter_ms", f.JitterMS, f.JitterMS >= 0 && f.JitterMS <= 10000, "0 ≤ X ≤ 10000")
		if !c.has(p+".fixed_ms") && !c.has(p+".jitter_ms") {
			c.errf(p, "a latency fault needs fixed_ms, jitter_ms or both")
		}
	case FaultDrop, FaultCorrupt:
		window()
		if c.require(p, "rate", "probability per frame, 0 < rate ≤ 1") {
			c.num(p+".rate", f.Rate, f.Rate > 0 && f.Rate <= 1, "0 < X ≤ 1")
		}
	case FaultFreeze:
		if c.require(p, "sensor", "a joint name, imu or contacts") {
			c.oneOf(p+".sensor", f.Sensor, append(c.s.JointNames(), "imu", "contacts")...)
		}
		if c.require(p, "at_s", "when the sensor freezes, s") {
			c.num(p+".at_s", f.AtS, f.AtS >= 0, "X ≥ 0")
		}
		if c.require(p, "for_s", "how long it stays frozen, s") {
			c.num(p+".for_s", f.ForS, f.ForS > 0, "X > 0")
		}
	case FaultPush:
		switch at, step := c.has(p+".at_s"), c.has(p+".at_step"); {
		case at && step:
			c.errf(p+".at_step", "a push happens at_s or at_step, not both")
		case !at && !step:
			c.errf(p, "a push needs at_s (a time) or at_step (a heel strike)")
		case at:
			c.num(p+".at_s", f.AtS, f.AtS >= 0, "X ≥ 0")
		default:
			c.num(p+".at_step", float64(f.AtStep), f.AtStep >= 1, "X ≥ 1")
		}
		imp, force := c.has(p+".impulse_ns"), c.has(p+".force_n")
		switch {
		case imp && force:
			c.errf(p+".force_n", "a push is an impulse_ns or a force_n with duration_s, not both")
		case !imp && !force:
			c.errf(p, "a push needs impulse_ns [x, y] or force_n [x, y] with duration_s")
		case imp:
			c.pair(p+".impulse_ns", f.ImpulseNS, 1e4)
			if c.has(p + ".duration_s") {
				c.errf(p+".duration_s", "an impulse acts over one tick; duration_s goes with force_n")
			}
		default:
			c.pair(p+".force_n", f.ForceN, 1e5)
			if c.require(p, "duration_s", "how long force_n is held, s") {
				c.num(p+".duration_s", f.DurationS, f.DurationS > 0 && f.DurationS <= 3600, "0 < X ≤ 3600")
			}
		}
	}
}

// pair checks an (x, y) list with components up to limit in magnitude.
func (c *checker) pair(path string, v []float64, limit float64) {
	if c.d.bad[path] {
		return
	}
	if len(v) != 2 {
		c.errf(path, "expected 2 numbers [x, y], got %d", len(v))
		return
	}
	for i, x := range v {
		c.num(fmt.Sprintf("%s[%d]", path, i), x, math.Abs(x) <= limit, fmt.Sprintf("|component| ≤ %g", limit))
	}
}

func (c *checker) alarms() {
	for k, v := range c.s.Alarms {
		p := "alarms." + k
		if !c.has(p) {
			continue
		}
		if !slices.Contains(AlarmKinds, k) {
			c.errf(p, "unknown alarm kind %q; known kinds: %s", k, strings.Join(AlarmKinds, ", "))
			continue
		}
		c.oneOf(p, string(v), string(SeverityWarn), string(SeverityTrip))
	}
}

func (c *checker) criteria() {
	k := &c.s.Pass
	c.num("pass.min_steps", float64(k.MinSteps), k.MinSteps >= 0, "X ≥ 0")
	if k.MinSpeedMPS != nil {
		c.num("pass.min_speed_mps", *k.MinSpeedMPS, math.Abs(*k.MinSpeedMPS) <= 100, "|X| ≤ 100")
	}
	if k.MaxSpeedMPS != nil {
		c.num("pass.max_speed_mps", *k.MaxSpeedMPS, math.Abs(*k.MaxSpeedMPS) <= 100, "|X| ≤ 100")
		if k.MinSpeedMPS != nil && *k.MaxSpeedMPS < *k.MinSpeedMPS {
			c.errf("pass.max_speed_mps", "%g m/s is below min_speed_mps %g m/s; allowed max_speed_mps ≥ min_speed_mps", *k.MaxSpeedMPS, *k.MinSpeedMPS)
		}
	}
	if k.MaxFrictionUtilization != nil {
		c.num("pass.max_friction_utilization", *k.MaxFrictionUtilization, *k.MaxFrictionUtilization > 0 && *k.MaxFrictionUtilization <= 1, "0 < X ≤ 1 (1 is the slip limit)")
	}
	if k.MinNormalForceN != nil {
		c.num("pass.min_normal_force_n", *k.MinNormalForceN, *k.MinNormalForceN >= 0, "X ≥ 0")
	}
	if k.MaxLatencyP99US != nil {
		c.num("pass.max_latency_p99_us", *k.MaxLatencyP99US, *k.MaxLatencyP99US > 0, "X > 0")
	}
}

// stand checks that the walker can be placed in the initial state the way
// the rig places it (plant.Model.Stand, as hil.InitialState calls it), and
// when it cannot, points at the fields that decide it: the leg angles, and
// the slope of the segment under the walker. Without this the failure comes
// later, from the plant, naming no field. A scenario that starts from the
// natural gait gets its state from the gait finder and is not checked here.
func (c *checker) stand(p plant.Params) []Problem {
	in := c.s.Initial
	if in.NaturalGait || len(in.LegAnglesRad) != 2 {
		return nil
	}
	opts := c.s.PlantOptions()
	m, err := plant.New(p, opts)
	if err != nil {
		c.errf("plant", "%v", err)
		return c.d.problems
	}
	rates := []float64{0, 0}
	copy(rates, in.LegRatesRadps)
	if m.HasTorso() {
		rates = append(rates, in.TorsoRateRadps)
	}
	angles := [2]float64{in.LegAnglesRad[0], in.LegAnglesRad[1]}
	stance := c.s.StanceLeg()
	st, err := m.Stand(stance, c.s.StartXM(), angles, in.TorsoAngleRad, rates...)
	if err == nil {
		return nil
	}
	k := min(max(st.Seg[stance], 0), len(c.s.Terrain.Segments)-1) // the segment under the stance foot
	seg := c.s.Terrain.Segments[k]
	segPath := fmt.Sprintf("terrain.segments[%d]", k)
	onSlope := ""
	if seg.SlopeRad != 0 {
		onSlope = fmt.Sprintf(" on a slope of %g rad (%s.slope_rad, line %d)", seg.SlopeRad, segPath, c.at(segPath+".slope_rad").line)
	}
	sides := [2]string{"left", "right"}
	// The same placement with scuffing allowed tells the two failures
	// apart: if it succeeds, only the swing foot was in the ground.
	opts.IgnoreScuff = true
	if loose, lerr := plant.New(p, opts); lerr == nil {
		if st, serr := loose.Stand(stance, c.s.StartXM(), angles, in.TorsoAngleRad, rates...); serr == nil {
			var none plant.Input
			gap := loose.Contacts(&st, &none)[1-stance].Gap
			c.errf("initial.leg_angles_rad", "cannot stand the walker: with the %s (stance) leg at %g rad and the %s (swing) leg at %g rad%s "+
				"the swing foot would be %.4g m below the ground; choose angles that put the swing foot at or above the ground, "+
				"or set physics.ignore_scuff", sides[stance], angles[stance], sides[1-stance], angles[1-stance], onSlope, -gap)
			return c.d.problems
		}
	}
	if seg.SlopeRad != 0 {
		c.errf(segPath+".slope_rad", "cannot stand the walker on this segment: at %g rad it is too steep for the stance foot to rest on "+
			"(no hip height puts the foot on the ground)", seg.SlopeRad)
	} else {
		c.errf("initial.leg_angles_rad", "cannot stand the walker with leg angles [%g, %g] rad: %v", angles[0], angles[1], err)
	}
	return c.d.problems
}

// margins checks the margins block; its defaults are filled by the loader
// (see defaults.go).
func (c *checker) margins() {
	m := &c.s.Margins
	for i, a := range m.Axes {
		if !slices.Contains(MarginAxes, a) {
			c.errf(fmt.Sprintf("margins.axes[%d]", i), "unknown axis %q; allowed: %s", a, strings.Join(MarginAxes, ", "))
		}
	}
	for _, a := range slices.Sorted(maps.Keys(m.Far)) {
		path := "margins.far." + a
		if !slices.Contains(MarginAxes, a) {
			c.errf(path, "unknown axis %q; allowed: %s", a, strings.Join(MarginAxes, ", "))
			continue
		}
		c.num(path, m.Far[a], math.Abs(m.Far[a]) <= 1e4, "|X| ≤ 10000")
	}
	if c.has("margins.tolerance") {
		c.num("margins.tolerance", m.Tolerance, m.Tolerance > 0 && m.Tolerance <= 0.5, "0 < X ≤ 0.5")
	}
	if c.has("margins.min_friction_ratio") {
		c.num("margins.min_friction_ratio", m.MinFrictionRatio, m.MinFrictionRatio == 0 || m.MinFrictionRatio >= 1, "X = 0 or X ≥ 1")
	}
	c.num("margins.min_push_ns", m.MinPushNS, m.MinPushNS >= 0 && m.MinPushNS <= 1000, "0 ≤ X ≤ 1000")
	c.num("margins.min_added_latency_ms", m.MinAddedLatencyMS, m.MinAddedLatencyMS >= 0 && m.MinAddedLatencyMS <= 10000, "0 ≤ X ≤ 10000")
	c.num("margins.min_slope_deg", m.MinSlopeDeg, m.MinSlopeDeg >= 0 && m.MinSlopeDeg < 90, "0 ≤ X < 90")
	if c.has("margins.max_spectral_radius") {
		c.num("margins.max_spectral_radius", m.MaxSpectralRadius, m.MaxSpectralRadius > 0 && m.MaxSpectralRadius <= 1, "0 < X ≤ 1")
	}
}

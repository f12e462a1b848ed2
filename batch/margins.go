package batch

// This file owns the margin search (gaitrig margins): per axis, the limit
// of a condition at which the firmware still meets the scenario's pass
// criteria, by a coarse grid and bisection, with the two runs that decided
// it.

import (
	"context"
	"fmt"
	"math"
	"path/filepath"

	"gaitrig/hil"
	"gaitrig/record"
	"gaitrig/report"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// Defaults of Margins' fields.
const (
	// DefaultMarginTolerance is the bisection's stopping width as a fraction
	// of the axis range (issue 10: 2 % of the bracket).
	DefaultMarginTolerance = 0.02
	// DefaultMarginGrid is the number of coarse grid points per axis
	// before the bisection (our choice).
	DefaultMarginGrid = 6
	// DefaultMarginRetries is how many more times a run the host spoiled
	// (HostTrouble) is made before its value is "not measured": the
	// suite's command-line default (gaitrig suite --retries).
	DefaultMarginRetries = 2
)

// Axis is one condition the margin search varies. Value Safe is the
// scenario as written (it must pass); the search moves towards Far.
type Axis struct {
	// Name is the axis's word in tables and JSON (friction, push_forward_mid, …).
	Name string
	// Unit of Safe, Far and the limit.
	Unit string
	// Safe and Far bound the search.
	Safe, Far float64
	// Apply changes the variant for value v.
	Apply func(s *scenarios.Scenario, v float64)
	// SafeOf, when not nil, reads Safe from the scenario as written (an
	// axis whose start is a value the scenario sets, such as its
	// encoder's resolution); nil keeps Safe.
	SafeOf func(s *scenarios.Scenario) float64
	// Geometric spaces the grid and halves the bracket in the logarithm
	// of the value (for an axis that spans orders of magnitude, such as a
	// resolution); the tolerance is then a fraction of the logarithmic
	// range. Safe and Far must both be positive.
	Geometric bool
	// Step, when positive, makes every value a multiple of it (a count);
	// the bisection ends when the bracket holds no other multiple.
	Step float64
}

// at is the grid value a fraction f of the way from Safe to Far.
func (a Axis) at(f float64) float64 {
	var v float64
	if a.Geometric {
		v = a.Safe * math.Pow(a.Far/a.Safe, f)
	} else {
		v = a.Safe + (a.Far-a.Safe)*f
	}
	return a.quantize(v)
}

// mid is the bisection's next value between p and q (p or q itself when
// no other value lies between them).
func (a Axis) mid(p, q float64) float64 {
	if a.Geometric {
		return a.quantize(math.Sqrt(p * q))
	}
	return a.quantize(0.5 * (p + q))
}

// wider reports whether the bracket p … q is wider than tol of the
// axis's range (measured in the logarithm for a geometric axis) and
// still holds a value to try.
func (a Axis) wider(p, q, tol float64) bool {
	if m := a.mid(p, q); m == p || m == q {
		return false
	}
	if a.Geometric {
		return math.Abs(math.Log(q/p)) > tol*math.Abs(math.Log(a.Far/a.Safe))
	}
	return math.Abs(q-p) > tol*math.Abs(a.Far-a.Safe)
}

func (a Axis) quantize(v float64) float64 {
	if a.Step > 0 {
		return a.Step * math.Round(v/a.Step)
	}
	return v
}

// MarginRun is a run that decided a limit, or a grid point.
type MarginRun struct {
	Value   float64        `json:"value"`            // the axis value run, in the axis's Unit
	Outcome record.Outcome `json:"outcome"`          // the run's outcome (aborted when it could not run)
	Reason  string         `json:"reason,omitempty"` // why the run ended so; empty for a plain pass
	Steps   int            `json:"steps"`            // heel strikes completed; 0 when it could not run
	Dir     string         `json:"run_dir"`          // the run folder of the last attempt
	// Attempts is how many times the run was made (more than 1 when the
	// host spoiled earlier attempts; each has its own run folder,
	// RUN.retry-K).
	Attempts int `json:"attempts"`
	// NotMeasured, when not empty, says why this value decides nothing:
	// the host spoiled every attempt (outcome invalid, or a link that
	// could not be opened) or the run could not be made at all. Such a
	// value is neither a pass nor a failure.
	NotMeasured string `json:"not_measured,omitempty"`
}

// passed and failed tell a measured pass and a measured failure; a run
// that is NotMeasured is neither.
func (r MarginRun) passed() bool { return r.NotMeasured == "" && r.Outcome == record.Pass }
func (r MarginRun) failed() bool { return r.NotMeasured == "" && r.Outcome != record.Pass }

// AxisMargin is the result of one axis.
type AxisMargin struct {
	Axis string  `json:"axis"` // the axis's name (Axis.Name)
	Unit string  `json:"unit"` // unit of Safe, Far, Limit, Tolerance, Required and Shortfall
	Safe float64 `json:"safe"` // the search's start (Axis.Safe, or read from the scenario)
	Far  float64 `json:"far"`  // the search's far end (the scenario's margins.far, or Axis.Far)
	// Limit is the last passing value found (Safe when the scenario as
	// written fails; Far when every value passed; NaN, null in JSON, when
	// the axis is NotMeasured).
	Limit float64 `json:"limit"`
	// NotMeasured, when not empty, says why the axis has no limit: a run
	// the search needed (the scenario as written, a grid point up to the
	// first failure, every grid point when none failed, or a bisection
	// point) was spoiled by the host on every attempt. A limit is never
	// decided by such a run.
	NotMeasured string `json:"not_measured,omitempty"`
	// Reached says the search found a failure (false: passed up to Far).
	Reached bool `json:"reached"`
	// NotMonotone is set when a grid point beyond the first failure passed.
	NotMonotone bool `json:"not_monotone"`
	// Tolerance is the final bracket width, in Unit.
	Tolerance float64    `json:"tolerance"`
	LastPass  *MarginRun `json:"last_pass,omitempty"`  // the run at Limit; nil when none passed or NotMeasured
	FirstFail *MarginRun `json:"first_fail,omitempty"` // the failing run nearest Limit; nil when none failed
	// Grid holds every run of the coarse grid, safe end first; Bisection
	// the runs of the bisection in the order made.
	Grid      []MarginRun `json:"grid"`
	Bisection []MarginRun `json:"bisection"` // the bisection's runs in the order made; empty when the grid decided
	// Required is the lab's minimum for this axis from the scenario's
	// margins block, in Unit (NaN: none); Meets says the limit is at least
	// as far from Safe as Required, Shortfall by how much it is not (in
	// Unit, 0 when it meets it).
	// MuStaticMin and FrictionRatio restate the friction axis's limit: the
	// lowest μ_s (of any segment, all scaled alike) the firmware still
	// walks on, and the scenario's μ_s over it (1/Limit). Zero on other
	// axes.
	MuStaticMin   float64 `json:"mu_static_min,omitempty"`
	FrictionRatio float64 `json:"friction_ratio,omitempty"` // the scenario's μ_s over MuStaticMin; 0 on other axes
	Required      float64 `json:"required"`                 // the lab's minimum, in Unit; NaN when none
	Meets         bool    `json:"meets_required"`           // the limit is at least Required (true when none is set), and there is no Error or NotMeasured
	Shortfall     float64 `json:"shortfall"`                // how far short of Required the limit is, in Unit; 0 when it meets it
	Error         string  `json:"error,omitempty"`          // why the axis has no margin (the scenario as written fails); empty otherwise
}

// Required returns the lab's minimum for an axis from a margins block, in
// the axis's unit, or NaN when the block sets none: friction as the
// fraction 1/min_friction_ratio of μ_s, every push axis min_push_ns,
// added latency min_added_latency_ms, slopes ±min_slope_deg.
func Required(m scenarios.Margins, axis string) float64 {
	v := math.NaN()
	switch {
	case axis == "friction" && m.MinFrictionRatio > 0:
		v = 1 / m.MinFrictionRatio
	case len(axis) > 5 && axis[:5] == "push_" && m.MinPushNS > 0:
		v = m.MinPushNS
	case axis == "added_latency" && m.MinAddedLatencyMS > 0:
		v = m.MinAddedLatencyMS
	case axis == "slope_up" && m.MinSlopeDeg > 0:
		v = m.MinSlopeDeg
	case axis == "slope_down" && m.MinSlopeDeg > 0:
		v = -m.MinSlopeDeg
	}
	return v
}

// judge fills Required, Meets and Shortfall: the limit must lie at least
// as far from Safe, in the direction of Far, as the requirement.
func (am *AxisMargin) judge(required float64) {
	am.Required = required
	am.Meets = am.Error == "" && am.NotMeasured == ""
	if math.IsNaN(required) || !am.Meets {
		return
	}
	dir := 1.0
	if am.Far < am.Safe {
		dir = -1
	}
	if d := (am.Limit - required) * dir; d < 0 {
		am.Meets = false
		am.Shortfall = -d
	}
}

// notMeasured marks the axis as having no limit, for reason.
func (am *AxisMargin) notMeasured(reason string) {
	am.NotMeasured = reason
	am.Limit = math.NaN()
	am.Reached = false
	am.LastPass, am.FirstFail = nil, nil
}

// bracket reads the coarse grid (safe end first): it returns the last
// measured pass and the first measured failure after it for the
// bisection, or ok false when the grid decides the axis by itself (every
// point passed: the limit is Far; the scenario as written fails) or
// cannot decide it (a point the host spoiled where the limit could lie).
// A point beyond the first failure that passes flags the axis not
// monotone; one beyond it that was not measured changes nothing.
func (am *AxisMargin) bracket() (pass, fail MarginRun, ok bool) {
	first := -1
	for g, r := range am.Grid {
		if r.NotMeasured != "" {
			// Every point up to the first failure must be measured: an
			// unmeasured one could have been the first failure.
			am.notMeasured(fmt.Sprintf("grid point %g %s: %s", r.Value, am.Unit, r.NotMeasured))
			return pass, fail, false
		}
		if r.failed() {
			first = g
			break
		}
	}
	switch first {
	case -1:
		am.Limit = am.Far
		am.LastPass = &am.Grid[len(am.Grid)-1]
		return pass, fail, false
	case 0:
		am.Limit = am.Safe
		am.Reached = true
		am.FirstFail = &am.Grid[0]
		am.Error = "the scenario as written fails: no margin"
		return pass, fail, false
	}
	am.Reached = true
	for _, r := range am.Grid[first+1:] {
		if r.passed() {
			am.NotMonotone = true
		}
	}
	return am.Grid[first-1], am.Grid[first], true
}

// Margins searches the limits of a scenario's axes. The zero value of a
// field is its default.
type Margins struct {
	// Dir is the folder for the run folders. Required.
	Dir string
	// Link overrides the scenario's link.
	Link string
	// Tolerance, Grid: see DefaultMarginTolerance, DefaultMarginGrid.
	Tolerance float64
	Grid      int // number of coarse grid points; 0 means DefaultMarginGrid
	// Jobs runs the grid points in parallel (Scheduler.Jobs).
	Jobs int
	// Seeds, when above 1, runs every value with that many seeds of noise,
	// drops and latency (SeedVariants); a value passes only when every
	// seed passes, and its run is the worst seed's (worstRun).
	Seeds int
	// Runner runs one job; default rig.Run.
	Runner RunFunc
	// Retries is how many more times a run the host spoiled is made
	// (Suite.Retries); 0 means DefaultMarginRetries, negative none.
	Retries int
}

// Nominal is what the margin search measures on the scenario as written
// before it varies anything: when the push steps start and how long a step
// takes.
type Nominal struct {
	// StrikeS is the simulated time of the heel strike that completes step
	// PushStep, s; PeriodS the mean step time of the run, s.
	StrikeS, PeriodS float64
}

// PushStep is the step whose heel strike starts the stance the push axes
// push in (our choice: late enough for a run from an explicit state to
// have settled, early enough to leave steps to recover in).
const PushStep = 10

// Push phases, as fractions of the nominal step period after the heel
// strike (our choice of early, mid and late stance).
var pushPhases = []struct {
	name  string
	phase float64
}{{"early", 0.1}, {"mid", 0.5}, {"late", 0.9}}

// DefaultAxes are every axis of scenarios.MarginAxes, in that order, with
// their default ranges, pushes timed from the nominal run.
func DefaultAxes(n Nominal) []Axis {
	axes := []Axis{FrictionAxis()}
	for _, dir := range []struct {
		name string
		sign float64
	}{{"forward", 1}, {"backward", -1}} {
		for _, p := range pushPhases {
			axes = append(axes, PushAxis("push_"+dir.name+"_"+p.name, dir.sign, 40, n.StrikeS+p.phase*n.PeriodS))
		}
	}
	axes = append(axes,
		Axis{Name: "added_latency", Unit: "ms", Safe: 0, Far: 40, Apply: func(s *scenarios.Scenario, v float64) {
			if v == 0 {
				return // the loader refuses a latency fault without a delay
			}
			s.Faults = append(s.Faults, scenarios.Fault{Kind: "latency", FixedMS: v})
		}},
		SlopeAxis("slope_up", 10),
		SlopeAxis("slope_down", -10),
		Axis{Name: "noise_multiple", Unit: "×", Safe: 1, Far: 50, Apply: func(s *scenarios.Scenario, v float64) {
			n := &s.Sensors
			n.AngleNoiseRad = v * math.Max(n.AngleNoiseRad, TypicalAngleNoiseRad)
			n.RateNoiseRadps = v * math.Max(n.RateNoiseRadps, TypicalRateNoiseRadps)
			n.IMUPitchNoiseRad = v * math.Max(n.IMUPitchNoiseRad, TypicalAngleNoiseRad)
			n.IMURateNoiseRadps = v * math.Max(n.IMURateNoiseRadps, TypicalRateNoiseRadps)
		}},
		EncoderAxis(),
		Axis{Name: "torque_fraction", Unit: "×", Safe: 1, Far: 0.05, Apply: func(s *scenarios.Scenario, v float64) {
			if s.Actuators.TorqueLimitNM > 0 {
				s.Actuators.TorqueLimitNM *= v
			}
			for k := range s.Actuators.JointTorqueLimitsNM {
				s.Actuators.JointTorqueLimitsNM[k] *= v
			}
		}},
		MassAxis("mass_plus", 50), MassAxis("mass_minus", -50),
		LegLengthAxis("leg_length_plus", 30), LegLengthAxis("leg_length_minus", -30),
	)
	axes = append(axes, BeltAxes()...) // treadmill scenarios only (margins_belt.go)
	return axes
}

// SelectAxes picks the named axes of all, in all's order; an unknown name
// is an error listing the known ones.
func SelectAxes(all []Axis, names []string) ([]Axis, error) {
	if len(names) == 0 {
		return all, nil
	}
	want := map[string]bool{}
	for _, n := range names {
		want[n] = true
	}
	var out []Axis
	for _, a := range all {
		if want[a.Name] {
			out = append(out, a)
			delete(want, a.Name)
		}
	}
	for n := range want {
		return nil, rig.Configf("margins: unknown axis %q; known axes: %v", n, scenarios.MarginAxes)
	}
	return out, nil
}

// EncoderAxis is the encoder resolution in counts per revolution, from the
// scenario's (the loader's default 4096, 12 bits) down to 16 (4 bits),
// searched geometrically in whole counts: a resolution matters by its
// ratio, so a linear grid would spend its points on fine encoders.
func EncoderAxis() Axis {
	return Axis{Name: "encoder_counts", Unit: "counts/rev", Safe: 4096, Far: 16, Geometric: true, Step: 1,
		SafeOf: func(s *scenarios.Scenario) float64 { return float64(s.Sensors.EncoderCountsPerRev) },
		Apply: func(s *scenarios.Scenario, v float64) {
			s.Sensors.EncoderCountsPerRev = int(math.Round(v))
		}}
}

// FrictionAxis scales μ_s and μ_k of every segment by the value (1 = the
// scenario's floor); the limit is the ratio μ_s,min / μ_s.
func FrictionAxis() Axis {
	return Axis{Name: "friction", Unit: "× μ_s", Safe: 1, Far: 0.05, Apply: func(s *scenarios.Scenario, v float64) {
		for i := range s.Terrain.Segments {
			g := &s.Terrain.Segments[i]
			if g.MuKinetic == 0 {
				g.MuKinetic = 0.8 * g.MuStatic // the loader's default ratio, kept when scaling
			}
			g.MuStatic *= v
			g.MuKinetic *= v
		}
	}}
}

// PushAxis pushes the hip with an impulse of the value (N·s, times sign:
// +1 forward, −1 backward) over one tick at simulated time atS.
func PushAxis(name string, sign, far, atS float64) Axis {
	return Axis{Name: name, Unit: "N·s", Safe: 0, Far: far, Apply: func(s *scenarios.Scenario, v float64) {
		if v == 0 {
			return
		}
		s.Faults = append(s.Faults, scenarios.Fault{Kind: "push", AtS: atS, ImpulseNS: []float64{sign * v, 0}})
	}}
}

// MassAxis scales every mass and moment of inertia of the plant by
// k = 1 + v/100 (v in %), the firmware unchanged: a walker heavier or
// lighter than the one the firmware was tuned for, its shape the same.
// At fixed geometry a moment of inertia ∫r² dm scales with the mass, by
// k; per-leg overrides and the shanks of a kneed walker are scaled alike.
func MassAxis(name string, farPct float64) Axis {
	return Axis{Name: name, Unit: "%", Safe: 0, Far: farPct, Apply: func(s *scenarios.Scenario, v float64) {
		k := 1 + v/100
		p := &s.Plant
		p.HipMassKG *= k
		p.Legs.MassKG *= k
		p.Legs.InertiaKGM2 *= k
		scaleShank(&p.Legs.Shank, func(sh *scenarios.Shank) {
			sh.MassKG *= k
			sh.InertiaKGM2 *= k
		})
		scale := func(o *scenarios.LegOverride) {
			scaled(&o.MassKG, k)
			scaled(&o.InertiaKGM2, k)
			scaleShankOverride(&o.Shank, func(so *scenarios.ShankOverride) {
				scaled(&so.MassKG, k)
				scaled(&so.InertiaKGM2, k)
			})
		}
		p.Legs.Left = scaleOverride(p.Legs.Left, scale)
		p.Legs.Right = scaleOverride(p.Legs.Right, scale)
		if p.Torso != nil {
			t := *p.Torso
			t.MassKG *= k
			t.InertiaKGM2 *= k
			p.Torso = &t
		}
	}}
}

// LegLengthAxis scales the legs by s = 1 + v/100 (v in %) at fixed mass,
// the firmware unchanged: every length (leg, centre-of-mass distance,
// foot radius, foot-arc offset) by s and the moment of inertia about the
// centre of mass by s² (∫r² dm with every r scaled by s), in the shared
// leg block, per-leg overrides and the shanks of a kneed walker alike.
func LegLengthAxis(name string, farPct float64) Axis {
	return Axis{Name: name, Unit: "%", Safe: 0, Far: farPct, Apply: func(s *scenarios.Scenario, v float64) {
		f := 1 + v/100
		l := &s.Plant.Legs
		l.LengthM *= f
		l.COMM *= f
		l.FootRadiusM *= f
		l.ArcOffsetM *= f
		l.InertiaKGM2 *= f * f
		scaleShank(&l.Shank, func(sh *scenarios.Shank) {
			sh.LengthM *= f
			sh.COMM *= f
			sh.InertiaKGM2 *= f * f
		})
		scale := func(o *scenarios.LegOverride) {
			for _, x := range []**float64{&o.LengthM, &o.COMM, &o.FootRadiusM, &o.ArcOffsetM} {
				scaled(x, f)
			}
			scaled(&o.InertiaKGM2, f*f)
			scaleShankOverride(&o.Shank, func(so *scenarios.ShankOverride) {
				scaled(&so.LengthM, f)
				scaled(&so.COMM, f)
				scaled(&so.InertiaKGM2, f*f)
			})
		}
		l.Left = scaleOverride(l.Left, scale)
		l.Right = scaleOverride(l.Right, scale)
	}}
}

// scaleOverride returns a copy of o changed by scale (nil stays nil), so
// the scenario the variant was derived from is never written through a
// shared pointer.
func scaleOverride(o *scenarios.LegOverride, scale func(*scenarios.LegOverride)) *scenarios.LegOverride {
	if o == nil {
		return nil
	}
	c := *o
	scale(&c)
	return &c
}

// scaleShank replaces *sh (when set) by a scaled copy, for the reason
// scaleOverride gives.
func scaleShank(sh **scenarios.Shank, scale func(*scenarios.Shank)) {
	if *sh != nil {
		c := **sh
		scale(&c)
		*sh = &c
	}
}

// scaleShankOverride is scaleShank for a per-leg shank override.
func scaleShankOverride(so **scenarios.ShankOverride, scale func(*scenarios.ShankOverride)) {
	if *so != nil {
		c := **so
		scale(&c)
		*so = &c
	}
}

// scaled replaces *x (when set) by a new value k times it.
func scaled(x **float64, k float64) {
	if *x != nil {
		v := **x * k
		*x = &v
	}
}

// SlopeAxis tilts every segment by the value in degrees (positive uphill).
func SlopeAxis(name string, farDeg float64) Axis {
	return Axis{Name: name, Unit: "°", Safe: 0, Far: farDeg, Apply: func(s *scenarios.Scenario, v float64) {
		for i := range s.Terrain.Segments {
			s.Terrain.Segments[i].SlopeRad += v * math.Pi / 180
		}
	}}
}

func (m Margins) withDefaults() Margins {
	if m.Tolerance <= 0 {
		m.Tolerance = DefaultMarginTolerance
	}
	if m.Grid < 2 {
		m.Grid = DefaultMarginGrid
	}
	if m.Jobs < 1 {
		m.Jobs = 1
	}
	if m.Runner == nil {
		m.Runner = rig.Run
	}
	if m.Retries == 0 {
		m.Retries = DefaultMarginRetries
	}
	return m
}

// runAll runs jobs and makes those the host spoiled again, up to
// m.Retries times (Suite.retry: each attempt in a run folder of its own).
func (m Margins) runAll(ctx context.Context, jobs []Job) ([]Done, []int) {
	done := Scheduler{Jobs: m.Jobs, Runner: m.Runner}.RunAll(ctx, jobs)
	attempts := Suite{Jobs: m.Jobs, Runner: m.Runner, Retries: max(m.Retries, 0)}.retry(ctx, jobs, done)
	return done, attempts
}

// MeasureNominal runs the scenario as written once and returns when the
// push steps start and the mean step time. A scenario that does not walk
// PushStep steps cannot be pushed there: that is an error.
func (m Margins) MeasureNominal(ctx context.Context, sc *scenarios.Scenario) (Nominal, MarginRun, error) {
	m = m.withDefaults()
	var steps []hil.StepInfo
	j := Job{Scenario: sc, Options: rig.Options{Link: m.Link, Clock: hil.Lockstep, RunDir: filepath.Join(m.Dir, sc.Name+"-margins-nominal"),
		OnStep: func(s hil.StepInfo) { steps = append(steps, s) }}}
	// Each attempt starts counting afresh: the steps are the last
	// attempt's, the one whose outcome is the run's.
	runner := func(ctx context.Context, sc *scenarios.Scenario, o rig.Options) (rig.Result, error) {
		steps = steps[:0]
		return m.Runner(ctx, sc, o)
	}
	done, attempts := Margins{Jobs: 1, Runner: runner, Retries: m.Retries}.runAll(ctx, []Job{j})
	d := done[0]
	run := marginRun(0, d, attempts[0])
	if err := ctx.Err(); err != nil {
		return Nominal{}, run, err
	}
	if run.NotMeasured != "" {
		return Nominal{}, run, fmt.Errorf("margins: the scenario as written could not be measured: %s", run.NotMeasured)
	}
	if len(steps) < PushStep+1 {
		return Nominal{}, run, fmt.Errorf("margins: the scenario as written walked %d steps (%s: %s); the push axes need at least %d", len(steps), run.Outcome, run.Reason, PushStep+1)
	}
	var n Nominal
	n.StrikeS = steps[PushStep-1].SimTimeS
	for _, s := range steps {
		n.PeriodS += s.DurationS / float64(len(steps))
	}
	return n, run, nil
}

// Search measures the nominal run, then searches the named axes (when
// names is empty: the scenario's margins.axes, or all of
// scenarios.MarginAxes). A zero Tolerance takes the scenario's
// margins.tolerance.
func (m Margins) Search(ctx context.Context, sc *scenarios.Scenario, names []string) ([]AxisMargin, error) {
	if m.Tolerance == 0 {
		m.Tolerance = sc.Margins.Tolerance
	}
	if len(names) == 0 {
		names = sc.Margins.Axes
	}
	m = m.withDefaults()
	n, _, err := m.MeasureNominal(ctx, sc)
	if err != nil {
		return nil, err
	}
	axes, err := SelectAxes(DefaultAxes(n), names)
	if err == nil {
		axes, err = axesForGround(sc, axes, names)
	}
	if err != nil {
		return nil, err
	}
	for i := range axes {
		if axes[i].SafeOf != nil {
			if v := axes[i].SafeOf(sc); v > 0 {
				axes[i].Safe = v
			}
		}
		far, ok := sc.Margins.Far[axes[i].Name]
		if !ok {
			continue
		}
		if far == axes[i].Safe || (far-axes[i].Safe)*(axes[i].Far-axes[i].Safe) < 0 || (axes[i].Geometric && far <= 0) {
			return nil, rig.Configf("scenario %s: margins.far.%s %g: the search starts at %g and goes towards %g; the end must lie on that side",
				sc.Name, axes[i].Name, far, axes[i].Safe, axes[i].Far)
		}
		axes[i].Far = far
	}
	return m.Run(ctx, sc, axes)
}

// Run searches every axis: first the coarse grids of all axes at once (in
// parallel), then each axis's bisection.
func (m Margins) Run(ctx context.Context, sc *scenarios.Scenario, axes []Axis) ([]AxisMargin, error) {
	m = m.withDefaults()
	if m.Dir == "" {
		return nil, rig.Configf("margins: no output folder")
	}
	out := make([]AxisMargin, len(axes))
	var jobs []Job
	for a, ax := range axes {
		out[a] = AxisMargin{Axis: ax.Name, Unit: ax.Unit, Safe: ax.Safe, Far: ax.Far}
		for g := 0; g < m.Grid; g++ {
			v := ax.at(float64(g) / float64(m.Grid-1))
			js, err := m.jobs(sc, ax, v, fmt.Sprintf("%s-grid%d", ax.Name, g))
			if err != nil {
				return nil, err
			}
			jobs = append(jobs, js...)
		}
	}
	done, attempts := m.runAll(ctx, jobs)
	if err := ctx.Err(); err != nil {
		return out, err
	}
	per := m.seeds()
	// Each axis's bracket: the last pass and the first failure found so
	// far, while the axis is still being bisected.
	type bracket struct {
		pass, fail MarginRun
		open       bool
	}
	br := make([]bracket, len(axes))
	for a, ax := range axes {
		am := &out[a]
		for g := 0; g < m.Grid; g++ {
			k := (a*m.Grid + g) * per
			v := ax.at(float64(g) / float64(m.Grid-1))
			am.Grid = append(am.Grid, worstOf(v, done[k:k+per], attempts[k:k+per]))
		}
		br[a].pass, br[a].fail, br[a].open = am.bracket()
	}
	// The bisections of all axes go step by step together, so their runs
	// share the cores as the grid's do; each axis's sequence of values
	// is the same as bisecting it alone.
	for i := 0; ; i++ {
		var jobs []Job
		var which []int
		var vals []float64
		for a, ax := range axes {
			if br[a].open && !ax.wider(br[a].pass.Value, br[a].fail.Value, m.Tolerance) {
				br[a].open = false // narrow enough
			}
			if !br[a].open {
				continue
			}
			v := ax.mid(br[a].pass.Value, br[a].fail.Value)
			js, err := m.jobs(sc, ax, v, fmt.Sprintf("%s-bisect%d", ax.Name, i))
			if err != nil {
				return nil, err
			}
			jobs = append(jobs, js...)
			which, vals = append(which, a), append(vals, v)
		}
		if len(jobs) == 0 {
			break
		}
		if err := ctx.Err(); err != nil {
			return out, err
		}
		d, n := m.runAll(ctx, jobs)
		if err := ctx.Err(); err != nil {
			return out, err
		}
		for j, a := range which {
			am, v := &out[a], vals[j]
			r := worstOf(v, d[j*per:(j+1)*per], n[j*per:(j+1)*per])
			am.Bisection = append(am.Bisection, r)
			switch {
			case r.NotMeasured != "":
				// The bracket cannot be narrowed past a value nobody
				// measured: no limit rather than one it might decide.
				am.notMeasured(fmt.Sprintf("bisection point %g %s: %s", v, axes[a].Unit, r.NotMeasured))
				br[a].open = false
			case r.Outcome == record.Pass:
				br[a].pass = r
			default:
				br[a].fail = r
			}
		}
	}
	for a := range axes {
		am := &out[a]
		if am.NotMeasured != "" || !am.Reached || am.Error != "" {
			continue // decided by the grid alone, or not measured
		}
		pass, fail := br[a].pass, br[a].fail
		am.Limit = pass.Value
		am.Tolerance = math.Abs(fail.Value - pass.Value)
		am.LastPass, am.FirstFail = &pass, &fail
	}
	for i := range out {
		out[i].judge(Required(sc.Margins, out[i].Axis))
		if out[i].Axis == "friction" && out[i].Limit > 0 && len(sc.Terrain.Segments) > 0 {
			mu := math.Inf(1)
			for _, g := range sc.Terrain.Segments {
				mu = math.Min(mu, g.MuStatic)
			}
			out[i].MuStaticMin = out[i].Limit * mu
			out[i].FrictionRatio = 1 / out[i].Limit
		}
	}
	return out, nil
}

// MarginsPage turns a search's result into the report's margins page.
func MarginsPage(scenario, dir string, res []AxisMargin) report.MarginsPage {
	pg := report.MarginsPage{Scenario: scenario, Dir: dir}
	for _, a := range res {
		ra := report.MarginAxis{Name: a.Axis, Unit: a.Unit, Limit: a.Limit, Required: a.Required, Reached: a.Reached, NotMonotone: a.NotMonotone}
		if a.LastPass != nil {
			ra.LastPassDir = a.LastPass.Dir
		}
		if a.FirstFail != nil {
			ra.FirstFailDir, ra.FailReason = a.FirstFail.Dir, string(a.FirstFail.Outcome)+": "+a.FirstFail.Reason
		}
		if a.NotMeasured != "" {
			ra.FailReason = "not measured: " + a.NotMeasured
		}
		for _, r := range append(append([]MarginRun(nil), a.Grid...), a.Bisection...) {
			if r.NotMeasured != "" {
				continue // neither a pass nor a failure: not drawn as either
			}
			ra.Points = append(ra.Points, report.MarginPoint{Value: r.Value, Steps: r.Steps, Pass: r.Outcome == record.Pass})
		}
		pg.Axes = append(pg.Axes, ra)
	}
	return pg
}

// MarginsSuite is the JUnit suite of a search: one case per axis, failed
// when the limit misses the lab's minimum (the message says by how much),
// an error when the axis could not be searched.
func MarginsSuite(scenario string, res []AxisMargin) report.Suite {
	s := report.Suite{Name: scenario + " margins"}
	for _, a := range res {
		c := report.Case{Name: a.Axis, Class: scenario, Detail: fmt.Sprintf("limit %g %s", a.Limit, a.Unit)}
		switch {
		case a.NotMeasured != "":
			// The host's fault, not the firmware's: an <error>, as the
			// suite reports infrastructure.
			c.Error = "not measured: " + a.NotMeasured
			c.Detail = "no limit"
		case a.Error != "":
			c.Failure = a.Error
		case !a.Meets:
			c.Failure = fmt.Sprintf("margin %g %s misses the required %g %s by %g %s", a.Limit, a.Unit, a.Required, a.Unit, a.Shortfall, a.Unit)
		}
		s.Cases = append(s.Cases, c)
	}
	return s
}

func (m Margins) seeds() int {
	if m.Seeds > 1 {
		return m.Seeds
	}
	return 1
}

// jobs makes the runs of one value: one, or one per seed.
func (m Margins) jobs(sc *scenarios.Scenario, ax Axis, v float64, tag string) ([]Job, error) {
	name := sc.Name + "-" + tag
	vs, err := Derive(sc, name, fmt.Sprintf("margin search: %s = %g %s", ax.Name, v, ax.Unit), func(s *scenarios.Scenario) { ax.Apply(s, v) })
	if err != nil {
		return nil, err
	}
	variants := []*scenarios.Scenario{vs}
	if m.seeds() > 1 {
		if variants, err = SeedVariants(vs, m.seeds()); err != nil {
			return nil, err
		}
	}
	var out []Job
	for _, s := range variants {
		out = append(out, Job{Scenario: s, Options: rig.Options{Link: m.Link, Clock: hil.Lockstep, RunDir: filepath.Join(m.Dir, s.Name)}})
	}
	return out, nil
}

// worstOf is the run that stands for one value run with several seeds:
// the worst measured failure when any seed failed; else, when the host
// spoiled a seed on every attempt, that seed's run (the value is not
// measured); else the worst pass. attempts[i] is how many times run i
// was made.
func worstOf(v float64, done []Done, attempts []int) MarginRun {
	runs := make([]MarginRun, len(done))
	seeds := make([]SeedRun, len(done))
	unmeasured := -1
	for i, d := range done {
		runs[i] = marginRun(v, d, attempts[i])
		seeds[i] = SeedRun{Outcome: runs[i].Outcome, Steps: runs[i].Steps, PeakUtilization: d.Result.Summary.PeakFrictionUtilization}
		if runs[i].NotMeasured != "" {
			seeds[i].Outcome = record.Invalid // worstRun passes over it
			if unmeasured < 0 {
				unmeasured = i
			}
		}
	}
	w := worstRun(seeds)
	if runs[w].failed() || unmeasured < 0 {
		return runs[w]
	}
	return runs[unmeasured]
}

// marginRun is the record of one value's run after attempts attempts.
func marginRun(v float64, d Done, attempts int) MarginRun {
	r := MarginRun{Value: v, Dir: d.Result.Dir, Attempts: attempts}
	if d.Err != nil {
		r.Outcome = record.Aborted
		r.Reason = d.Err.Error()
		r.NotMeasured = "could not run: " + d.Err.Error()
		if HostTrouble(d) {
			r.NotMeasured = fmt.Sprintf("host trouble on all %d attempts: %v", attempts, d.Err)
		}
		return r
	}
	r.Outcome = d.Result.Summary.Outcome
	r.Reason = d.Result.Summary.Reason
	r.Steps = d.Result.Summary.Steps
	if HostTrouble(d) {
		r.NotMeasured = fmt.Sprintf("host trouble on all %d attempts: outcome %s (%s)", attempts, r.Outcome, r.Reason)
	}
	return r
}

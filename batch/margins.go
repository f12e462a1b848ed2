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
}

// MarginRun is a run that decided a limit, or a grid point.
type MarginRun struct {
	Value   float64        `json:"value"`
	Outcome record.Outcome `json:"outcome"`
	Reason  string         `json:"reason,omitempty"`
	Steps   int            `json:"steps"`
	Dir     string         `json:"run_dir"`
}

// AxisMargin is the result of one axis.
type AxisMargin struct {
	Axis string  `json:"axis"`
	Unit string  `json:"unit"`
	Safe float64 `json:"safe"`
	Far  float64 `json:"far"`
	// Limit is the last passing value found (Safe when the scenario as
	// written fails; Far when every value passed).
	Limit float64 `json:"limit"`
	// Reached says the search found a failure (false: passed up to Far).
	Reached bool `json:"reached"`
	// NotMonotone is set when a grid point beyond the first failure passed.
	NotMonotone bool `json:"not_monotone"`
	// Tolerance is the final bracket width, in Unit.
	Tolerance float64    `json:"tolerance"`
	LastPass  *MarginRun `json:"last_pass,omitempty"`
	FirstFail *MarginRun `json:"first_fail,omitempty"`
	// Grid holds every run of the coarse grid, safe end first.
	Grid  []MarginRun `json:"grid"`
	Error string      `json:"error,omitempty"`
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
	Grid      int
	// Jobs runs the grid points in parallel (Scheduler.Jobs).
	Jobs int
	// Runner runs one job; default rig.Run.
	Runner RunFunc
}

// DefaultAxes are the axes searched when none are given: floor friction,
// a forward and a backward push at early stance, added latency, slope up and
// down.
func DefaultAxes() []Axis {
	return []Axis{
		FrictionAxis(),
		PushAxis("push_forward_early", 1, 60),
		PushAxis("push_backward_early", -1, 60),
		{Name: "added_latency", Unit: "ms", Safe: 0, Far: 40, Apply: func(s *scenarios.Scenario, v float64) {
			if v == 0 {
				return // the loader refuses a latency fault without a delay
			}
			s.Faults = append(s.Faults, scenarios.Fault{Kind: "latency", FixedMS: v})
		}},
		SlopeAxis("slope_up", 10),
		SlopeAxis("slope_down", -10),
	}
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
// +1 forward, −1 backward) over one tick at the heel strike that completes
// step 10: at the start of the stance (early stance). Mid and late stance
// need the nominal period measured first and are not searched yet.
func PushAxis(name string, sign, far float64) Axis {
	const atStep = 10
	return Axis{Name: name, Unit: "N·s", Safe: 0, Far: far, Apply: func(s *scenarios.Scenario, v float64) {
		if v == 0 {
			return
		}
		s.Faults = append(s.Faults, scenarios.Fault{Kind: "push", AtStep: atStep, ImpulseNS: []float64{sign * v, 0}})
	}}
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
	return m
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
			v := ax.Safe + (ax.Far-ax.Safe)*float64(g)/float64(m.Grid-1)
			j, err := m.job(sc, ax, v, fmt.Sprintf("%s-grid%d", ax.Name, g))
			if err != nil {
				return nil, err
			}
			jobs = append(jobs, j)
		}
	}
	done := Scheduler{Jobs: m.Jobs, Runner: m.Runner}.RunAll(ctx, jobs)
	for a, ax := range axes {
		am := &out[a]
		for g := 0; g < m.Grid; g++ {
			d := done[a*m.Grid+g]
			v := ax.Safe + (ax.Far-ax.Safe)*float64(g)/float64(m.Grid-1)
			am.Grid = append(am.Grid, marginRun(v, d))
		}
		first := -1
		for g, r := range am.Grid {
			if r.Outcome != record.Pass {
				first = g
				break
			}
		}
		switch first {
		case -1:
			am.Limit = ax.Far
			am.LastPass = &am.Grid[m.Grid-1]
			continue
		case 0:
			am.Limit = ax.Safe
			am.Reached = true
			am.FirstFail = &am.Grid[0]
			am.Error = "the scenario as written fails: no margin"
			continue
		}
		am.Reached = true
		for _, r := range am.Grid[first+1:] {
			if r.Outcome == record.Pass {
				am.NotMonotone = true
			}
		}
		pass, fail := am.Grid[first-1], am.Grid[first]
		width := m.Tolerance * math.Abs(ax.Far-ax.Safe)
		for i := 0; math.Abs(fail.Value-pass.Value) > width; i++ {
			if err := ctx.Err(); err != nil {
				return out, err
			}
			v := 0.5 * (pass.Value + fail.Value)
			j, err := m.job(sc, ax, v, fmt.Sprintf("%s-bisect%d", ax.Name, i))
			if err != nil {
				return nil, err
			}
			r := marginRun(v, Scheduler{Jobs: 1, Runner: m.Runner}.RunAll(ctx, []Job{j})[0])
			if r.Outcome == record.Pass {
				pass = r
			} else {
				fail = r
			}
		}
		am.Limit = pass.Value
		am.Tolerance = math.Abs(fail.Value - pass.Value)
		am.LastPass, am.FirstFail = &pass, &fail
	}
	return out, nil
}

func (m Margins) job(sc *scenarios.Scenario, ax Axis, v float64, tag string) (Job, error) {
	name := sc.Name + "-" + tag
	vs, err := Derive(sc, name, fmt.Sprintf("margin search: %s = %g %s", ax.Name, v, ax.Unit), func(s *scenarios.Scenario) { ax.Apply(s, v) })
	if err != nil {
		return Job{}, err
	}
	return Job{Scenario: vs, Options: rig.Options{Link: m.Link, Clock: hil.Lockstep, RunDir: filepath.Join(m.Dir, name)}}, nil
}

func marginRun(v float64, d Done) MarginRun {
	r := MarginRun{Value: v, Dir: d.Result.Dir}
	if d.Err != nil {
		r.Outcome = record.Aborted
		r.Reason = d.Err.Error()
		return r
	}
	r.Outcome = d.Result.Summary.Outcome
	r.Reason = d.Result.Summary.Reason
	r.Steps = d.Result.Summary.Steps
	return r
}

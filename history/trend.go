package history

import (
	"math"

	"gaitrig/batch"
	"gaitrig/record"
	"gaitrig/scenarios"
)

// DefaultDriftBuilds is how many builds back drift is looked for (k): the
// figure's last k changes. Our choice: a week of nightly builds.
const DefaultDriftBuilds = 5

// Figure is one figure followed across builds: how to take it from a
// result and how far the baseline lets it move.
type Figure struct {
	// Name is the figure's name as the baseline and summary call it.
	Name string
	// Label is what the page calls it, with its unit.
	Label string
	// Value takes the figure from a result (NaN when not measured).
	Value func(Result) float64
	// Tolerance is how far the figure may move from ref under the
	// baseline's tolerances, either way (the page draws ref ± it).
	Tolerance func(t batch.Tolerances, ref float64) float64
}

// Figures are the figures the trend follows, with the tolerance the
// suite's baseline comparison (batch.Compare) gives each.
var Figures = []Figure{
	{"steps", "steps (heel strikes)", func(r Result) float64 { return float64(r.Steps) },
		func(t batch.Tolerances, _ float64) float64 { return float64(t.StepsAbs) }},
	{"mean_speed_mps", "mean speed, m/s", func(r Result) float64 { return r.MeanSpeedMPS },
		func(t batch.Tolerances, ref float64) float64 { return t.SpeedRel * math.Abs(ref) }},
	{"peak_friction_utilization", "peak friction utilization", func(r Result) float64 { return r.PeakFriction },
		func(t batch.Tolerances, _ float64) float64 { return t.FrictionAbs }},
	{"min_normal_force_n", "minimum normal force, N", func(r Result) float64 { return r.MinNormalForceN },
		func(t batch.Tolerances, ref float64) float64 { return t.NormalForceRel * math.Abs(ref) }},
	{"latency_p99_us", "command latency p99, µs", func(r Result) float64 { return r.LatencyP99US },
		func(t batch.Tolerances, ref float64) float64 { return t.LatencyP99Rel * math.Abs(ref) }},
}

// Point is one build's value of a figure.
type Point struct {
	ID       int64   `json:"id"`       // the stored result's id
	Build    string  `json:"build"`    // firmware revision, else the greeting's build
	Value    float64 `json:"value"`    // NaN (null) when not measured
	Outcome  string  `json:"outcome"`  // the run's outcome
	Drifting bool    `json:"drifting"` // part of the drift found (see Drift)
}

// Trend is one figure across builds.
type Trend struct {
	Name      string  `json:"name"`      // the figure's name (Figure.Name, margin_AXIS, spectral_radius)
	Label     string  `json:"label"`     // what the page calls it, with its unit
	Points    []Point `json:"points"`    // one per result the figure is taken from, oldest first
	Reference float64 `json:"reference"` // the baseline's value (else the first build's): the band's centre
	Tolerance float64 `json:"tolerance"` // the band's half width
	// Drift is set when the figure moved the same way over the last
	// DriftBuilds changes by more than Tolerance in total although no
	// single change was beyond it: a slow regression no nightly
	// comparison with the previous build would catch.
	Drift      bool    `json:"drift"`
	DriftTotal float64 `json:"drift_total"` // the total move over those builds
}

// Drift reports whether the last k changes of values all moved the same
// way (each strictly), none by more than tol, and together by more than
// tol; total is then last − first over those k+1 values (0 when there
// is no drift). Fewer than k+1
// values, a NaN among them, or k < 1 is no drift.
func Drift(values []float64, k int, tol float64) (drift bool, total float64) {
	if k < 1 || len(values) < k+1 {
		return false, 0
	}
	w := values[len(values)-k-1:]
	sign := 0.0
	for i := 1; i < len(w); i++ {
		d := w[i] - w[i-1]
		if math.IsNaN(d) || d == 0 || math.Abs(d) > tol {
			return false, 0
		}
		s := math.Copysign(1, d)
		if sign != 0 && s != sign {
			return false, 0
		}
		sign = s
	}
	total = w[len(w)-1] - w[0]
	if math.Abs(total) <= tol {
		return false, 0
	}
	return true, total
}

// Trends follows every figure of Figures over a scenario's results (oldest
// first), with the band of the baseline entry ref (nil: the first
// result's values) under tolerances tol, and looks for drift over the last
// k changes.
//
// Results whose outcome says nothing about the build (invalid: the host
// spoiled it; aborted: stopped by a person) are left out, except an
// envelope result whose axes the host kept from measuring: its measured
// margins still count, the others are gaps.
//
// The figures of Figures come from runs' results; envelope results
// (margins, stability: Result.Envelope) add one trend per margin axis
// stored and one of the spectral radius, after them, when any result has
// them (see envelopeTrends).
func Trends(all []Result, ref *batch.Entry, tol batch.Tolerances, k int) []Trend {
	rs := make([]Result, 0, len(all))
	var env []Result
	for _, r := range all {
		switch {
		case r.Envelope() && r.Outcome != string(record.Aborted):
			env = append(env, r)
		case r.Envelope():
		case r.Outcome != string(record.Invalid) && r.Outcome != string(record.Aborted):
			rs = append(rs, r)
		}
	}
	out := make([]Trend, 0, len(Figures))
	for _, f := range Figures {
		t := Trend{Name: f.Name, Label: f.Label, Points: []Point{}}
		vals := make([]float64, len(rs))
		for i, r := range rs {
			b := r.FirmwareRevision
			if b == "" {
				b = r.FirmwareBuild
			}
			vals[i] = f.Value(r)
			t.Points = append(t.Points, Point{ID: r.ID, Build: b, Value: vals[i], Outcome: r.Outcome})
		}
		t.Reference = math.NaN()
		if ref != nil {
			t.Reference = entryValue(*ref, f.Name)
		} else if len(vals) > 0 {
			t.Reference = vals[0]
		}
		t.Tolerance = f.Tolerance(tol, t.Reference)
		// The drift test uses the same per-build tolerance as the band.
		t.Drift, t.DriftTotal = Drift(vals, k, t.Tolerance)
		if t.Drift {
			for i := len(t.Points) - k - 1; i < len(t.Points); i++ {
				t.Points[i].Drifting = true
			}
		}
		out = append(out, t)
	}
	return append(out, envelopeTrends(env, k)...)
}

// envelopeTrends follows each margin axis (in scenarios.MarginAxes order)
// and the spectral radius over the envelope results that hold them. No
// baseline covers them, so the band is centred on the first build's
// value, and its half width is how finely that build measured the figure:
// a margin's bracket width (the search's resolution), the half width of
// the spectral radius's 95 % bootstrap interval. Drift is then a move the
// same way over the last k builds, each within the measurement's
// resolution, more than it in total.
func envelopeTrends(env []Result, k int) []Trend {
	var out []Trend
	for _, axis := range scenarios.MarginAxes {
		var pts []Point
		var vals, res []float64
		unit := ""
		for _, r := range env {
			m, ok := r.Margins[axis]
			if !ok {
				continue
			}
			unit = m.Unit
			pts = append(pts, Point{ID: r.ID, Build: buildOf(r), Value: m.Limit, Outcome: r.Outcome})
			vals, res = append(vals, m.Limit), append(res, m.Resolution)
		}
		if len(pts) == 0 {
			continue
		}
		out = append(out, envelopeTrend("margin_"+axis, "margin "+axis+", "+unit, pts, vals, res, k))
	}
	var pts []Point
	var vals, res []float64
	for _, r := range env {
		if st := r.Stability; st != nil {
			pts = append(pts, Point{ID: r.ID, Build: buildOf(r), Value: st.SpectralRadius, Outcome: r.Outcome})
			vals, res = append(vals, st.SpectralRadius), append(res, (st.RadiusHigh-st.RadiusLow)/2)
		}
	}
	if len(pts) > 0 {
		out = append(out, envelopeTrend("spectral_radius", "spectral radius of the step-to-step map", pts, vals, res, k))
	}
	return out
}

// envelopeTrend is one envelope figure's trend, its band centred on the
// first measured value with that build's resolution as half width.
func envelopeTrend(name, label string, pts []Point, vals, res []float64, k int) Trend {
	t := Trend{Name: name, Label: label, Points: pts, Reference: math.NaN(), Tolerance: math.NaN()}
	for i, v := range vals {
		if !math.IsNaN(v) {
			t.Reference, t.Tolerance = v, res[i]
			break
		}
	}
	t.Drift, t.DriftTotal = Drift(vals, k, t.Tolerance)
	if t.Drift {
		for i := len(t.Points) - k - 1; i < len(t.Points); i++ {
			t.Points[i].Drifting = true
		}
	}
	return t
}

// buildOf is how a point names its build: the firmware revision, else the
// greeting's build.
func buildOf(r Result) string {
	if r.FirmwareRevision != "" {
		return r.FirmwareRevision
	}
	return r.FirmwareBuild
}

// entryValue is a baseline entry's value of the named figure.
func entryValue(e batch.Entry, name string) float64 {
	switch name {
	case "steps":
		return float64(e.Steps)
	case "mean_speed_mps":
		return e.MeanSpeedMPS
	case "peak_friction_utilization":
		return e.PeakFrictionUtilization
	case "min_normal_force_n":
		return e.MinNormalForceN
	case "latency_p99_us":
		if e.LatencyP99US != nil {
			return *e.LatencyP99US
		}
	}
	return math.NaN()
}

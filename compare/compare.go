// Package compare puts two recorded runs side by side: the verdict against
// the suite's tolerances (batch.Compare with batch.DefaultTolerances), the
// per-step metrics with their differences, the alarms of each, the
// scenarios' differences field by field, the firmware greetings, and, when
// both runs start from the same state under the same scenario, the first
// tick where the plant trajectories part. It writes an HTML page with the
// two runs overlaid on shared axes, or the same result as JSON.
package compare

import (
	"fmt"
	"math"
	"sort"

	"github.com/goccy/go-yaml"

	"gaitrig/batch"
	"gaitrig/record"
)

// Run is what the comparison shows of one run.
type Run struct {
	// Dir is the run folder.
	Dir string `json:"run_folder"`
	// Scenario and ScenarioHash name the scenario and its exact text.
	Scenario     string `json:"scenario"`
	ScenarioHash string `json:"scenario_hash"` // hex SHA-256 of the scenario text (record.Manifest.ScenarioHash)
	// Clock is lockstep or wallclock.
	Clock string `json:"clock"`
	// Greeting is the firmware's greeting.
	Greeting record.Greeting `json:"greeting"`
	// Summary is summary.json; nil when the run has none (killed).
	Summary *record.Summary `json:"summary"`
	// Alarms are the warn and trip lines of events.jsonl.
	Alarms []record.Event `json:"alarms"`
	// Notes say what was incomplete in the folder.
	Notes []string `json:"notes,omitempty"`
}

// FieldDiff is one scenario field that differs; a missing side is null.
type FieldDiff struct {
	Field string `json:"field"` // dotted path of the field, list items by index (faults[0].kind)
	A     any    `json:"a"`     // the value in run A's scenario; nil (null) when A lacks the field
	B     any    `json:"b"`     // the value in run B's scenario; nil (null) when B lacks the field
}

// StepPair is one step of each run, matched by index, with B − A.
type StepPair struct {
	Index int          `json:"index"` // the step's number, from 1
	A     *record.Step `json:"a"`     // run A's step; nil (null) when A has fewer steps
	B     *record.Step `json:"b"`     // run B's step; nil (null) when B has fewer steps
	// Diff holds B − A of the step metrics when both runs have the step.
	Diff *StepDiff `json:"diff,omitempty"`
}

// StepDiff is B − A of the step metrics.
type StepDiff struct {
	DurationS       float64 `json:"duration_s"`       // step duration, s
	LengthM         float64 `json:"length_m"`         // step length, m
	SpeedMPS        float64 `json:"speed_mps"`        // mean speed over the step, m/s
	PeakUtilization float64 `json:"peak_utilization"` // peak friction utilization (a ratio)
	MinNormalN      float64 `json:"min_normal_n"`     // least stance normal force, N
}

// Divergence is the first tick whose plant state differs between the runs.
type Divergence struct {
	// Tick and T are the tick index and its simulated time.
	Tick int64   `json:"tick"`
	T    float64 `json:"t_s"` // simulated time of Tick, s
	// Field is the telemetry column that differs first; A and B its values.
	Field string  `json:"field"`
	A     float64 `json:"a"` // run A's value of Field
	B     float64 `json:"b"` // run B's value of Field
}

// Result is the comparison of run A (the reference) with run B.
type Result struct {
	A Run `json:"a"` // the reference run
	B Run `json:"b"` // the run compared with it
	// Within is true when B is within the tolerances of A: no regression.
	Within bool `json:"within_tolerances"`
	// Tolerances are the suite's tolerances used.
	Tolerances batch.Tolerances `json:"tolerances"`
	// Regressions say in words what got worse from A to B beyond them.
	Regressions []string `json:"regressions"`
	// ScenarioDiffs are the scenario fields that differ.
	ScenarioDiffs []FieldDiff `json:"scenario_differences"`
	// SameStart is true when both runs ran the same scenario text from the
	// same initial state, bit for bit; only then is Divergence looked for.
	SameStart bool `json:"same_start"`
	// ComparedTicks is how many ticks both telemetries have.
	ComparedTicks int64 `json:"compared_ticks"`
	// Divergence is the first tick whose q or q̇ differs; nil when the
	// runs agree on every compared tick or do not start alike.
	Divergence *Divergence `json:"first_divergence"`
	// Steps pairs the steps of both runs by index.
	Steps []StepPair `json:"steps"`
	// Caution is the safety caution.
	Caution string `json:"caution"`

	series [2]*traces // for the page
}

// Runs compares the run folders a (reference) and b.
func Runs(a, b string) (*Result, error) {
	ra, err := record.Open(a)
	if err != nil {
		return nil, err
	}
	rb, err := record.Open(b)
	if err != nil {
		return nil, err
	}
	res := &Result{A: runOf(ra), B: runOf(rb), Tolerances: batch.DefaultTolerances, Caution: record.Caution}
	switch {
	case ra.Summary == nil || rb.Summary == nil:
		res.Regressions = []string{"a run has no summary.json (killed or still going): the runs cannot be judged against the tolerances"}
	default:
		res.Regressions = batch.Compare(batch.EntryOf(*ra.Summary), batch.EntryOf(*rb.Summary), res.Tolerances)
		// A run the host spoiled says nothing about the firmware: two of
		// them agreeing is no evidence that B is as good as A.
		for _, r := range []struct {
			name string
			s    *record.Summary
		}{{"A", ra.Summary}, {"B", rb.Summary}} {
			if r.s.Outcome == record.Invalid {
				res.Regressions = append(res.Regressions, fmt.Sprintf("run %s is invalid (%s): it says nothing about the firmware; run it again on a quieter host", r.name, r.s.Reason))
			}
		}
	}
	if res.Regressions == nil {
		res.Regressions = []string{}
	}
	res.Within = len(res.Regressions) == 0
	if res.ScenarioDiffs, err = scenarioDiffs(ra.Manifest.ScenarioText, rb.Manifest.ScenarioText); err != nil {
		return nil, fmt.Errorf("compare: %w", err)
	}
	res.SameStart = ra.Manifest.ScenarioHash == rb.Manifest.ScenarioHash && sameBits(ra.Manifest.InitialQ, rb.Manifest.InitialQ) &&
		sameBits(ra.Manifest.InitialV, rb.Manifest.InitialV) && ra.Manifest.TickHz == rb.Manifest.TickHz
	res.Steps = pairSteps(ra.Steps, rb.Steps)
	if err := res.walk(ra, rb); err != nil {
		return nil, err
	}
	return res, nil
}

func runOf(r *record.Run) Run {
	out := Run{Dir: r.Dir, Scenario: r.Manifest.Scenario, ScenarioHash: r.Manifest.ScenarioHash, Clock: r.Manifest.Clock,
		Greeting: r.Manifest.Greeting, Summary: r.Summary, Notes: r.Notes, Alarms: []record.Event{}}
	for _, e := range r.Events {
		if e.Severity == record.Warn || e.Severity == record.Trip {
			out.Alarms = append(out.Alarms, e)
		}
	}
	return out
}

func sameBits(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
			return false
		}
	}
	return true
}

func pairSteps(a, b []record.Step) []StepPair {
	n := max(len(a), len(b))
	out := make([]StepPair, n)
	for i := 0; i < n; i++ {
		p := StepPair{Index: i + 1}
		if i < len(a) {
			p.A = &a[i]
		}
		if i < len(b) {
			p.B = &b[i]
		}
		if p.A != nil && p.B != nil {
			p.Diff = &StepDiff{DurationS: p.B.DurationS - p.A.DurationS, LengthM: p.B.LengthM - p.A.LengthM,
				SpeedMPS: p.B.SpeedMPS - p.A.SpeedMPS, PeakUtilization: p.B.PeakUtilization - p.A.PeakUtilization,
				MinNormalN: p.B.MinNormalN - p.A.MinNormalN}
		}
		out[i] = p
	}
	return out
}

// scenarioDiffs lists the fields whose values differ between two scenario
// texts, by dotted path (lists by index), in path order.
func scenarioDiffs(a, b string) ([]FieldDiff, error) {
	var va, vb any
	if err := yaml.Unmarshal([]byte(a), &va); err != nil {
		return nil, fmt.Errorf("scenario of run A: %w", err)
	}
	if err := yaml.Unmarshal([]byte(b), &vb); err != nil {
		return nil, fmt.Errorf("scenario of run B: %w", err)
	}
	fa, fb := map[string]any{}, map[string]any{}
	flatten("", va, fa)
	flatten("", vb, fb)
	keys := map[string]bool{}
	for k := range fa {
		keys[k] = true
	}
	for k := range fb {
		keys[k] = true
	}
	out := []FieldDiff{}
	for k := range keys {
		x, okA := fa[k]
		y, okB := fb[k]
		if okA && okB && fmt.Sprint(x) == fmt.Sprint(y) {
			continue
		}
		out = append(out, FieldDiff{Field: k, A: x, B: y})
	}
	sort.Slice(out, func(i, j int) bool { return out[i].Field < out[j].Field })
	return out, nil
}

func flatten(prefix string, v any, out map[string]any) {
	join := func(k string) string {
		if prefix == "" {
			return k
		}
		return prefix + "." + k
	}
	switch t := v.(type) {
	case map[string]any:
		for k, x := range t {
			flatten(join(k), x, out)
		}
	case []any:
		for i, x := range t {
			flatten(fmt.Sprintf("%s[%d]", prefix, i), x, out)
		}
	default:
		out[prefix] = v
	}
}

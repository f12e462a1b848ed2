package record

import (
	"bufio"
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"runtime"
	"strconv"
	"strings"
	"testing"
	"time"
)

func testManifest() Manifest {
	return Manifest{
		Scenario:     "unit-test",
		ScenarioFile: "testdata/none.yaml",
		ScenarioText: "name: unit-test\n",
		ScenarioHash: "abc123",
		Plant: &Plant{HipMassKG: 8, GravityMPS2: 9.81, Legs: [2]Leg{{LengthM: 1, FootRadiusM: 0.3}, {LengthM: 1, FootRadiusM: 0.25}},
			Torso:   &Torso{MassKG: 15, COMM: 0.3, InertiaKGM2: 0.6},
			Terrain: Terrain{StartM: [2]float64{-5, 0}, Segments: []TerrainSegment{{LengthM: 200, MuStatic: 0.8, MuKinetic: 0.6}}}},
		ToolVersion: "test",
		Seed:        42,
		Clock:       "lockstep",
		TickHz:      1000,
		Link:        "builtin",
		Host:        "testhost",
		NumQ:        5,
		JointNames:  []string{"hip_left", "hip_right"},
		FootModes:   []string{"free", "rolling", "sliding"},
		InitialQ:    []float64{0, 0.88, 0.18, -0.18, 0.1 + 0.2},
		InitialV:    []float64{0.9, -0.01, -1, -0.6, math.SmallestNonzeroFloat64},
	}
}

// awkward are floats whose text forms are easy to get wrong.
var awkward = []float64{0, math.Copysign(0, -1), 0.1 + 0.2, 1.0 / 3, -2.5e-310, math.SmallestNonzeroFloat64,
	math.MaxFloat64, -math.MaxFloat64, math.Inf(1), math.Inf(-1), 1e21, 123456789012345678, math.Pi}

func randomTick(r *rand.Rand, i int64) Tick {
	f := func() float64 {
		if r.IntN(4) == 0 {
			return awkward[r.IntN(len(awkward))]
		}
		// any finite bit pattern
		for {
			x := math.Float64frombits(r.Uint64())
			if !math.IsNaN(x) && !math.IsInf(x, 0) {
				return x
			}
		}
	}
	t := Tick{Index: i, T: float64(i) * 1e-3, WallS: f(), Kinetic: f(), Potential: f(), LatencyUS: f(),
		Fresh: r.IntN(2) == 0, Stance: r.IntN(2), Push: [2]float64{f(), f()}}
	if r.IntN(3) == 0 {
		t.LatencyUS = math.NaN()
	}
	for k := 0; k < 5; k++ {
		t.Q[k], t.V[k] = f(), f()
	}
	for k := 0; k < 2; k++ {
		t.Angle[k], t.Rate[k], t.Commanded[k], t.Applied[k] = f(), f(), f(), f()
		t.Feet[k] = Foot{Mode: r.IntN(3), NormalN: f(), TangentialN: f(), Utilization: f(), Slip: r.IntN(2) == 1, CoP: f(), ContactX: f()}
	}
	return t
}

// sameBits compares two ticks float by float, bit for bit (any NaN equals
// any NaN).
func sameBits(a, b *Tick) bool {
	_, va := expectedRow(a, MaxQ, []string{"0", "1", "2", "3", "4", "5", "6", "7"})
	_, vb := expectedRow(b, MaxQ, []string{"0", "1", "2", "3", "4", "5", "6", "7"})
	for i := range va {
		if math.IsNaN(va[i]) && math.IsNaN(vb[i]) {
			continue
		}
		if math.Float64bits(va[i]) != math.Float64bits(vb[i]) {
			return false
		}
	}
	return true
}

// expectedRow is the telemetry layout written out by hand, independently
// of the column table in tick.go: the header names a torso walker's
// columns get and the row's values as float64 (codes and flags as
// numbers). Tests compare the table-driven writer, reader and Parquet
// export with it.
func expectedRow(t *Tick, nq int, joints []string) (names []string, vals []float64) {
	add := func(n string, v float64) { names, vals = append(names, n), append(vals, v) }
	add("tick", float64(t.Index))
	add("t_s", t.T)
	add("wall_s", t.WallS)
	links := []string{"left", "right", "torso", "link3", "link4", "link5", "link6", "link7"}
	for i := 0; i < nq; i++ {
		switch i {
		case 0:
			add("x_hip_m", t.Q[i])
		case 1:
			add("y_hip_m", t.Q[i])
		default:
			add("theta_"+links[i-2]+"_rad", t.Q[i])
		}
	}
	for i := 0; i < nq; i++ {
		switch i {
		case 0:
			add("vx_hip_mps", t.V[i])
		case 1:
			add("vy_hip_mps", t.V[i])
		default:
			add("omega_"+links[i-2]+"_radps", t.V[i])
		}
	}
	for j, n := range joints {
		add("angle_"+n+"_rad", t.Angle[j])
	}
	for j, n := range joints {
		add("rate_"+n+"_radps", t.Rate[j])
	}
	for j, n := range joints {
		add("tau_cmd_"+n+"_nm", t.Commanded[j])
	}
	for j, n := range joints {
		add("tau_applied_"+n+"_nm", t.Applied[j])
	}
	add("push_x_n", t.Push[0])
	add("push_y_n", t.Push[1])
	for k, f := range []string{"left", "right"} {
		ft := t.Feet[k]
		add("mode_"+f, float64(ft.Mode))
		add("normal_"+f+"_n", ft.NormalN)
		add("tangential_"+f+"_n", ft.TangentialN)
		add("utilization_"+f, ft.Utilization)
		slip := 0.0
		if ft.Slip {
			slip = 1
		}
		add("slip_"+f, slip)
		add("cop_"+f+"_m", ft.CoP)
		add("contact_x_"+f+"_m", ft.ContactX)
	}
	add("energy_kinetic_j", t.Kinetic)
	add("energy_potential_j", t.Potential)
	add("energy_total_j", t.Kinetic+t.Potential)
	add("latency_us", t.LatencyUS)
	fresh := 0.0
	if t.Fresh {
		fresh = 1
	}
	add("fresh", fresh)
	add("stance", float64(t.Stance))
	add("belt_speed_mps", t.BeltSpeed)
	add("belt_position_m", t.BeltPos)
	return names, vals
}

func columnNames(c []Column) []string {
	out := make([]string, len(c))
	for i := range c {
		out[i] = c[i].Name
	}
	return out
}

func TestRoundTrip(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "run")
	w, err := Create(dir, testManifest())
	if err != nil {
		t.Fatal(err)
	}
	g := Greeting{Name: "ref-walker", Build: "2026-12-01", Protocol: 1, Actuators: 2}
	if err := w.SetGreeting(g); err != nil {
		t.Fatal(err)
	}
	r := rand.New(rand.NewPCG(1, 2))
	var want []Tick
	for i := int64(0); i < 2000; i++ {
		tk := randomTick(r, i)
		want = append(want, tk)
		if err := w.Tick(&tk); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.SetGreeting(g); err == nil {
		t.Error("SetGreeting after the first tick must fail")
	}
	steps := []Step{
		{Index: 1, Stance: 0, StartS: 0, EndS: 0.61, DurationS: 0.61, LengthM: 0.5, SpeedMPS: 0.5 / 0.61, PeakUtilization: 0.31,
			MinNormalN: 12.5, ImpactLossJ: 1.25, PosWorkJ: 3, NegWorkJ: -0.5, CostOfTransport: 0.1 + 0.2, CoPTravelM: 0.09,
			Pose: Pose{Hip: [2]float64{0.3, 0.88}, Feet: [2][2]float64{{0.05, 0}, {0.55, 0}}, TorsoTop: [2]float64{0.3, 1.5}, HasTorso: true}},
		{Index: 2, Stance: 1, StartS: 0.61, EndS: 1.2, MinNormalN: math.Inf(1)},
	}
	for _, s := range steps {
		if err := w.Step(s); err != nil {
			t.Fatal(err)
		}
	}
	wall := time.Date(2026, 12, 1, 22, 0, 0, 123456789, time.UTC)
	events := []Event{
		{Tick: 17, T: 0.017, Wall: wall, Kind: "friction_limit", Severity: Warn, Message: "left foot needs more friction than μ_s allows", Foot: "left", Segment: 2,
			Values: map[string]float64{"utilization": 1.0 + 1e-15, "mu_static": 0.15, "nan": math.NaN(), "inf": math.Inf(-1)}},
		{Tick: 1999, T: 1.999, Wall: wall.Add(time.Second), Kind: "watchdog", Severity: Trip, Message: "no command for 50 ms", Segment: NoSegment},
		{Tick: 0, T: 0, Wall: wall, Kind: "segment_zero", Severity: Info, Message: "segment 0 is a real segment", Segment: 0},
	}
	for _, e := range events {
		if err := w.Event(e); err != nil {
			t.Fatal(err)
		}
	}
	sum := Summary{Outcome: Tripped, Reason: "watchdog", Steps: 2, SimTimeS: 2, WallTimeS: 0.4,
		Alarms: map[string]int{"watchdog": 1, "friction_limit": 3}, PeakFrictionUtilization: 1.0000000000000002,
		MinNormalForceN: math.Inf(1), MeanSpeedMPS: 0.8, LatencyUS: &Latency{P50: 80, P99: 950.5, Max: math.NaN()},
		Criteria: []Criterion{{Name: "min_steps", Pass: false, Value: 2, Limit: 30}, {Name: "max_latency_p99_us", Pass: true, Value: math.NaN(), Limit: 2000}}}
	if err := w.Close(sum); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(sum); err == nil {
		t.Error("second Close must fail")
	}
	if err := w.Tick(&want[0]); err == nil {
		t.Error("Tick after Close must fail")
	}

	run, err := Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	if len(run.Notes) != 0 {
		t.Errorf("notes on a clean run: %v", run.Notes)
	}
	m := run.Manifest
	exp := testManifest()
	if m.Greeting != g || m.SchemaVersion != SchemaVersion || m.Seed != 42 || m.ScenarioText != exp.ScenarioText || !reflect.DeepEqual(m.Plant, exp.Plant) {
		t.Errorf("manifest: %+v", m)
	}
	if !reflect.DeepEqual(m.InitialQ, exp.InitialQ) || !reflect.DeepEqual(m.InitialV, exp.InitialV) {
		t.Errorf("initial state not exact: %v %v", m.InitialQ, m.InitialV)
	}
	if names, _ := expectedRow(&Tick{}, 5, exp.JointNames); !reflect.DeepEqual(m.Columns, names) || m.StartTime.IsZero() {
		t.Errorf("columns %v start %v", m.Columns, m.StartTime)
	}
	got, trunc, err := run.AllTicks()
	if err != nil || trunc {
		t.Fatalf("AllTicks: %v truncated %v", err, trunc)
	}
	if len(got) != len(want) {
		t.Fatalf("read %d ticks, wrote %d", len(got), len(want))
	}
	for i := range got {
		// Only the arrays' used entries are written; clear the rest.
		w := want[i]
		for k := 5; k < MaxQ; k++ {
			w.Q[k], w.V[k] = 0, 0
		}
		if !sameBits(&got[i], &w) || got[i].Index != w.Index || got[i].Stance != w.Stance || got[i].Feet[0].Mode != w.Feet[0].Mode {
			t.Fatalf("tick %d differs:\n got %+v\nwant %+v", i, got[i], w)
		}
	}
	if !reflect.DeepEqual(run.Steps, steps) {
		t.Errorf("steps:\n got %+v\nwant %+v", run.Steps, steps)
	}
	if len(run.Events) != len(events) {
		t.Fatalf("events: got %d", len(run.Events))
	}
	for i, e := range events {
		g := run.Events[i]
		if !g.Wall.Equal(e.Wall) || g.Kind != e.Kind || g.Severity != e.Severity || g.Message != e.Message || g.Foot != e.Foot || g.Segment != e.Segment || g.Tick != e.Tick || g.T != e.T {
			t.Errorf("event %d:\n got %+v\nwant %+v", i, g, e)
		}
		for k, v := range e.Values {
			if gv := g.Values[k]; !(gv == v || math.IsNaN(gv) && math.IsNaN(v)) {
				t.Errorf("event %d value %s: got %v want %v", i, k, gv, v)
			}
		}
	}
	s := run.Summary
	if s == nil {
		t.Fatal("no summary")
	}
	if s.Outcome != Tripped || s.Ticks != 2000 || !math.IsInf(s.MinNormalForceN, 1) || s.PeakFrictionUtilization != 1.0000000000000002 ||
		!math.IsNaN(s.LatencyUS.Max) || s.LatencyUS.P99 != 950.5 || s.Caution != Caution || s.ToolVersion != "test" ||
		len(s.Criteria) != 2 || !math.IsNaN(s.Criteria[1].Value) || s.Alarms["friction_limit"] != 3 {
		t.Errorf("summary: %+v", s)
	}
	// The summary keys the issue asks for are there by name.
	raw, _ := os.ReadFile(filepath.Join(dir, SummaryFile))
	var keys map[string]any
	if err := json.Unmarshal(raw, &keys); err != nil {
		t.Fatal(err)
	}
	for _, k := range []string{"outcome", "steps", "sim_time_s", "alarms", "peak_friction_utilization", "min_normal_force_n", "mean_speed_mps", "latency_us", "criteria"} {
		if _, ok := keys[k]; !ok {
			t.Errorf("summary.json lacks key %s", k)
		}
	}
}

func TestCreateRefusesNonEmptyFolder(t *testing.T) {
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, "precious.txt"), []byte("keep me"), 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := Create(dir, testManifest()); err == nil || !strings.Contains(err.Error(), "not empty") {
		t.Fatalf("want refusal, got %v", err)
	}
	empty := t.TempDir()
	w, err := Create(empty, testManifest())
	if err != nil {
		t.Fatalf("an existing empty folder is fine: %v", err)
	}
	w.Close(Summary{Outcome: Aborted})
	bad := testManifest()
	bad.NumQ = MaxQ + 1
	if _, err := Create(filepath.Join(t.TempDir(), "x"), bad); err == nil {
		t.Error("num_q beyond MaxQ must fail")
	}
}

// TestEventReportsWriteError makes the events file refuse a write: Event
// must say so (zerolog alone only prints such an error to stderr), and the
// next event that does get written reports no error.
func TestEventReportsWriteError(t *testing.T) {
	dir := t.TempDir()
	w, err := Create(dir, testManifest())
	if err != nil {
		t.Fatal(err)
	}
	ev := Event{Kind: "watchdog", Severity: Trip, Message: "no command", Segment: NoSegment}
	if err := w.Event(ev); err != nil {
		t.Fatalf("first event: %v", err)
	}
	// A descriptor opened for reading only fails every write, as a file on
	// a failed disk would.
	ro, err := os.Open(filepath.Join(dir, EventsFile))
	if err != nil {
		t.Fatal(err)
	}
	defer ro.Close()
	good := w.eventsOut.f
	w.eventsOut.f = ro
	if err := w.Event(ev); err == nil || !strings.Contains(err.Error(), "record: events") {
		t.Fatalf("an event that could not be written returned %v, want a record: events error", err)
	}
	w.eventsOut.f = good
	if err := w.Event(ev); err != nil {
		t.Fatalf("event after the failure: %v", err)
	}
	if err := w.Close(Summary{Outcome: Pass}); err != nil {
		t.Fatal(err)
	}
	data, err := os.ReadFile(filepath.Join(dir, EventsFile))
	if err != nil {
		t.Fatal(err)
	}
	if n := strings.Count(string(data), "\n"); n != 2 {
		t.Fatalf("events.jsonl holds %d lines, want the 2 that were written", n)
	}
}

// TestCreateClaimsFolder starts several runs on one folder at once: exactly
// one may own it, and the manifest on disk is that one's.
func TestCreateClaimsFolder(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "run")
	const n = 8
	type result struct {
		w   *Writer
		err error
		id  int
	}
	results := make(chan result, n)
	for i := 0; i < n; i++ {
		go func(i int) {
			m := testManifest()
			m.Seed = int64(i)
			w, err := Create(dir, m)
			results <- result{w, err, i}
		}(i)
	}
	winner := -1
	for i := 0; i < n; i++ {
		r := <-results
		if r.err == nil {
			if winner >= 0 {
				t.Errorf("runs %d and %d both own %s", winner, r.id, dir)
			}
			winner = r.id
			defer r.w.Close(Summary{Outcome: Pass})
		} else if !strings.Contains(r.err.Error(), "choose a new folder") {
			t.Errorf("run %d: unclear refusal: %v", r.id, r.err)
		}
	}
	if winner < 0 {
		t.Fatal("no run got the folder")
	}
	run, err := Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	if run.Manifest.Seed != int64(winner) {
		t.Errorf("manifest is run %d's, the folder belongs to run %d", run.Manifest.Seed, winner)
	}
}

// writeSmallRun writes n ticks, n/10 steps and events, and closes the run.
func writeSmallRun(t *testing.T, n int) string {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "run")
	w, err := Create(dir, testManifest())
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i < n; i++ {
		tk := Tick{Index: int64(i), T: float64(i) / 1000}
		tk.Q[0] = float64(i) * 0.001
		if err := w.Tick(&tk); err != nil {
			t.Fatal(err)
		}
		if i%10 == 9 {
			w.Step(Step{Index: i/10 + 1, EndS: tk.T})
			w.Event(Event{Tick: int64(i), Kind: "heel_strike", Severity: Info, Message: "step", Segment: NoSegment})
		}
	}
	if err := w.Close(Summary{Outcome: Pass}); err != nil {
		t.Fatal(err)
	}
	return dir
}

func appendTo(t *testing.T, path, text string) {
	t.Helper()
	f, err := os.OpenFile(path, os.O_APPEND|os.O_WRONLY, 0)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if _, err := f.WriteString(text); err != nil {
		t.Fatal(err)
	}
}

func TestTruncatedLastLine(t *testing.T) {
	dir := writeSmallRun(t, 100)
	appendTo(t, filepath.Join(dir, TelemetryFile), "100,0.1,0,0.1")
	appendTo(t, filepath.Join(dir, StepsFile), "11,0,1.0")
	appendTo(t, filepath.Join(dir, EventsFile), `{"tick":100,"t_s":0.1,"ki`)
	os.Remove(filepath.Join(dir, SummaryFile))
	run, err := Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	if len(run.Steps) != 10 || len(run.Events) != 10 || run.Summary != nil {
		t.Errorf("steps %d events %d summary %v", len(run.Steps), len(run.Events), run.Summary)
	}
	notes := strings.Join(run.Notes, "\n")
	for _, w := range []string{"steps.csv: last line is incomplete", "read 10 complete lines", "events.jsonl: last line is incomplete", "summary.json is missing"} {
		if !strings.Contains(notes, w) {
			t.Errorf("notes lack %q:\n%s", w, notes)
		}
	}
	tr, err := run.Ticks()
	if err != nil {
		t.Fatal(err)
	}
	defer tr.Close()
	last := int64(-1)
	for tr.Next() {
		last = tr.Tick().Index
	}
	if tr.Err() != nil || !tr.Truncated() || tr.Rows() != 100 || last != 99 {
		t.Errorf("err %v truncated %v rows %d last %d", tr.Err(), tr.Truncated(), tr.Rows(), last)
	}
}

// A manifest whose sizes do not fit a telemetry row is refused by Open with
// an error, even when the telemetry header and rows agree with it (a file
// from another build, or edited by hand): reading its rows would index past
// the row's fixed arrays.
func TestOpenRefusesOversizedManifest(t *testing.T) {
	tests := []struct {
		name   string
		numQ   int
		joints int
	}{
		{"too many coordinates", MaxQ + 1, 2},
		{"negative coordinates", -1, 2},
		{"too many joints", 5, MaxJoints + 1},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			dir := writeSmallRun(t, 1)
			var m Manifest
			data, err := os.ReadFile(filepath.Join(dir, ManifestFile))
			if err != nil {
				t.Fatal(err)
			}
			if err := json.Unmarshal(data, &m); err != nil {
				t.Fatal(err)
			}
			m.NumQ = tc.numQ
			m.JointNames = nil
			for i := 0; i < tc.joints; i++ {
				m.JointNames = append(m.JointNames, "j"+strconv.Itoa(i))
			}
			if err := writeJSONAtomic(filepath.Join(dir, ManifestFile), &m); err != nil {
				t.Fatal(err)
			}
			cols := columnNames(TickColumns(m.NumQ, m.JointNames))
			row := strings.Repeat("0,", len(cols)-1) + "0\n"
			if err := os.WriteFile(filepath.Join(dir, TelemetryFile), []byte(csvHeader(cols)+row), 0o644); err != nil {
				t.Fatal(err)
			}
			run, err := Open(dir)
			if err == nil {
				_, _, err = run.AllTicks()
				t.Fatalf("Open accepted num_q %d with %d joints (rows: %v)", tc.numQ, tc.joints, err)
			}
			if !strings.Contains(err.Error(), "manifest") {
				t.Fatalf("error %q does not name the manifest", err)
			}
		})
	}
}

func TestMalformedLineIsAnError(t *testing.T) {
	dir := writeSmallRun(t, 20)
	path := filepath.Join(dir, TelemetryFile)
	data, _ := os.ReadFile(path)
	lines := strings.SplitAfter(string(data), "\n")
	lines[3] = "this is not a telemetry row\n"
	os.WriteFile(path, []byte(strings.Join(lines, "")), 0o644)
	run, err := Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	_, _, err = run.AllTicks()
	if err == nil || !strings.Contains(err.Error(), "telemetry.csv:4:") {
		t.Errorf("want an error at telemetry.csv:4, got %v", err)
	}
	ev := filepath.Join(dir, EventsFile)
	appendTo(t, ev, "{broken}\n")
	if _, err := Open(dir); err == nil || !strings.Contains(err.Error(), "events.jsonl:3:") {
		t.Errorf("want an error at events.jsonl:3, got %v", err)
	}
}

func TestTickAllocatesNothing(t *testing.T) {
	w, err := Create(filepath.Join(t.TempDir(), "run"), testManifest())
	if err != nil {
		t.Fatal(err)
	}
	defer w.Close(Summary{Outcome: Pass})
	r := rand.New(rand.NewPCG(3, 4))
	tk := randomTick(r, 0)
	allocs := testing.AllocsPerRun(5000, func() {
		tk.Index++
		if err := w.Tick(&tk); err != nil {
			t.Fatal(err)
		}
	})
	if allocs != 0 {
		t.Errorf("Tick allocates %v times per row, want 0", allocs)
	}
}

// writeRows writes n rows and n/100 steps through a Writer and returns the
// process's allocations in that time, the telemetry goroutine's included
// (Flush waits for it to format every row).
func writeRows(t *testing.T, n int) uint64 {
	w, err := Create(filepath.Join(t.TempDir(), "run"), testManifest())
	if err != nil {
		t.Fatal(err)
	}
	defer w.Close(Summary{Outcome: Pass})
	tk := randomTick(rand.New(rand.NewPCG(11, 12)), 0)
	st := Step{Index: 1, MinNormalN: 3, Pose: Pose{HasTorso: true}}
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	for i := 0; i < n; i++ {
		tk.Index = int64(i)
		if err := w.Tick(&tk); err != nil {
			t.Fatal(err)
		}
		if i%100 == 0 {
			if err := w.Step(st); err != nil {
				t.Fatal(err)
			}
		}
	}
	if err := w.Flush(); err != nil {
		t.Fatal(err)
	}
	runtime.ReadMemStats(&after)
	return after.Mallocs - before.Mallocs
}

// Formatting rows and steps allocates nothing either: a run four times
// longer makes no more allocations than a short one beyond a small slack
// (the flush handshake, timers).
func TestWriterAllocatesNothingPerRow(t *testing.T) {
	short, long := writeRows(t, 1000), writeRows(t, 4000)
	perRow := (float64(long) - float64(short)) / 3000
	t.Logf("%d mallocs for 1000 rows, %d for 4000: %.4f per row", short, long, perRow)
	if perRow > 0.01 {
		t.Errorf("%.3f allocations per row, want 0", perRow)
	}
}

// BenchmarkTickWrite measures telemetry throughput: rows are handed over
// faster than they can be formatted, so the queue stays full and ns/op is
// the telemetry goroutine's cost per row (formatting, buffered write,
// periodic flushes), not just the hand-over the loop sees.
func BenchmarkTickWrite(b *testing.B) {
	w, err := Create(filepath.Join(b.TempDir(), "run"), testManifest())
	if err != nil {
		b.Fatal(err)
	}
	defer w.Close(Summary{Outcome: Pass})
	r := rand.New(rand.NewPCG(5, 6))
	tk := randomTick(r, 0)
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		tk.Index = int64(i)
		if err := w.Tick(&tk); err != nil {
			b.Fatal(err)
		}
	}
}

const childEnv = "GAITRIG_RECORD_KILL_CHILD"

// TestSIGKILLLosesLittle runs a child process (this test binary again) that
// streams ticks at 1 kHz and says on its stdout which row it has just
// handed to Tick, kills it with SIGKILL at an arbitrary moment, and checks
// that the newest row on disk is at most FlushInterval plus a margin older,
// in the child's own clock, than the last row the child handed over. Both
// times are the child's, so a stall of the whole child or of this process
// (a busy host) does not count against the writer: only rows that sat in
// the writer's buffer while newer ones arrived do.
func TestSIGKILLLosesLittle(t *testing.T) {
	if dir := os.Getenv(childEnv); dir != "" {
		killChild(dir)
		return
	}
	for round, wait := range []time.Duration{230 * time.Millisecond, 410 * time.Millisecond, 777 * time.Millisecond} {
		dir := filepath.Join(t.TempDir(), "run")
		cmd := exec.Command(os.Args[0], "-test.run=^TestSIGKILLLosesLittle$")
		cmd.Env = append(os.Environ(), childEnv+"="+dir)
		out, err := cmd.StdoutPipe()
		if err != nil {
			t.Fatal(err)
		}
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		// The reader keeps the child's last "handed INDEX WALL" line; it
		// ends when the killed child's end of the pipe closes.
		ready := make(chan error, 1)
		last := make(chan string, 1)
		go func() {
			br := bufio.NewReader(out)
			line, err := br.ReadString('\n')
			if err == nil && line != "ready\n" {
				err = os.ErrInvalid
			}
			ready <- err
			var newest string
			for {
				l, err := br.ReadString('\n')
				if err != nil {
					break
				}
				newest = l
			}
			last <- newest
		}()
		select {
		case err := <-ready:
			if err != nil {
				cmd.Process.Kill()
				cmd.Wait()
				t.Fatalf("child did not start: %v", err)
			}
		case <-time.After(20 * time.Second):
			cmd.Process.Kill()
			cmd.Wait()
			t.Fatal("child did not report ready within 20 s")
		}
		time.Sleep(wait)
		if err := cmd.Process.Kill(); err != nil {
			t.Fatal(err)
		}
		handedLine := <-last
		cmd.Wait()
		var handedIdx int64
		var handedWall float64
		if _, err := fmt.Sscanf(handedLine, "handed %d %g\n", &handedIdx, &handedWall); err != nil {
			t.Fatalf("round %d: last line of the child %q: %v", round, handedLine, err)
		}

		run, err := Open(dir)
		if err != nil {
			t.Fatal(err)
		}
		tr, err := run.Ticks()
		if err != nil {
			t.Fatal(err)
		}
		var newest Tick
		for tr.Next() {
			if tr.Tick().Index != int64(tr.Rows()-1) {
				t.Fatalf("row %d has index %d: rows lost in the middle", tr.Rows()-1, tr.Tick().Index)
			}
			newest = *tr.Tick()
		}
		tr.Close()
		if tr.Err() != nil {
			t.Fatal(tr.Err())
		}
		if tr.Rows() == 0 {
			t.Fatalf("round %d: no complete rows on disk after %v of running", round, wait)
		}
		// The kill can land between Tick and the line that reports it, so
		// one row more than reported may be on disk.
		if newest.Index > handedIdx+1 {
			t.Fatalf("round %d: row %d on disk, but the child said it handed over rows up to %d only", round, newest.Index, handedIdx)
		}
		lag := time.Duration((handedWall - newest.WallS) * float64(time.Second))
		t.Logf("round %d: killed after %v; %d rows on disk (truncated last line: %v), %d handed over; newest row on disk %.1f ms older than the last handed over",
			round, wait, tr.Rows(), tr.Truncated(), handedIdx+1, lag.Seconds()*1000)
		if limit := FlushInterval + 50*time.Millisecond; lag > limit {
			t.Errorf("round %d: the newest row on disk is %v older than the last row handed over, want ≤ %v", round, lag, limit)
		}
		if run.Summary != nil || !strings.Contains(strings.Join(run.Notes, " "), "summary.json is missing") {
			t.Errorf("a killed run must read as unfinished: %v", run.Notes)
		}
	}
}

// killChild is the child side of TestSIGKILLLosesLittle: it streams ticks
// until it is killed, saying after each which row it handed over and its
// wall time, and stops by itself after 60 s if it is not killed.
func killChild(dir string) {
	m := testManifest()
	start := time.Now()
	m.StartTime = start
	w, err := Create(dir, m)
	if err != nil {
		os.Stdout.WriteString("error: " + err.Error() + "\n")
		os.Exit(3)
	}
	os.Stdout.WriteString("ready\n")
	var tk Tick
	line := make([]byte, 0, 64)
	for i := int64(0); time.Since(start) < 60*time.Second; i++ {
		tk.Index = i
		tk.T = float64(i) / 1000
		tk.WallS = time.Since(start).Seconds()
		w.Tick(&tk)
		line = append(strconv.AppendInt(append(line[:0], "handed "...), i, 10), ' ')
		line = append(strconv.AppendFloat(line, tk.WallS, 'g', -1, 64), '\n')
		os.Stdout.Write(line)
		time.Sleep(time.Millisecond)
	}
	w.Close(Summary{Outcome: Aborted, Reason: "child was not killed"})
	os.Exit(0)
}

// BenchmarkFormatRow measures formatting one telemetry row from the
// column table: the telemetry goroutine's cost per row without the file.
func BenchmarkFormatRow(b *testing.B) {
	m := testManifest()
	tk := randomTick(rand.New(rand.NewPCG(5, 6)), 0)
	cols := tickFields(m.NumQ, m.JointNames)
	buf := make([]byte, 0, 4096)
	b.ReportAllocs()
	for i := 0; i < b.N; i++ {
		tk.Index = int64(i)
		buf = appendRow(buf[:0], cols, &tk)
	}
}

// BenchmarkTickRead measures streaming one telemetry row back from disk.
func BenchmarkTickRead(b *testing.B) {
	dir := filepath.Join(b.TempDir(), "run")
	w, err := Create(dir, testManifest())
	if err != nil {
		b.Fatal(err)
	}
	r := rand.New(rand.NewPCG(9, 10))
	const rows = 20000
	for i := int64(0); i < rows; i++ {
		tk := randomTick(r, i)
		w.Tick(&tk)
	}
	w.Close(Summary{Outcome: Pass})
	run, err := Open(dir)
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	b.ResetTimer()
	var tr *TickReader
	for i := 0; i < b.N; i++ {
		if tr == nil || !tr.Next() {
			if tr != nil {
				tr.Close()
			}
			if tr, err = run.Ticks(); err != nil {
				b.Fatal(err)
			}
			if !tr.Next() {
				b.Fatal("no rows")
			}
		}
	}
	b.StopTimer()
	tr.Close()
}

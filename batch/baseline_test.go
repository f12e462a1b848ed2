package batch

import (
	"errors"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"gaitrig/record"
	"gaitrig/rig"
)

func ptr(v float64) *float64 { return &v }

var goodEntry = Entry{Outcome: "pass", Steps: 30, MeanSpeedMPS: 0.8, PeakFrictionUtilization: 0.3, MinNormalForceN: 200, LatencyP99US: ptr(300)}

// with returns goodEntry changed by f.
func with(f func(e *Entry)) Entry {
	e := goodEntry
	f(&e)
	return e
}

func TestCompareEachTolerance(t *testing.T) {
	tol := Tolerances{StepsAbs: 2, SpeedRel: 0.05, FrictionAbs: 0.05, NormalForceRel: 0.10, LatencyP99Rel: 0.5, NewAlarmKinds: true}
	tests := []struct {
		name string
		tol  Tolerances
		got  Entry
		msg  string // substring of the one regression, "" for none
	}{
		{"same", tol, goodEntry, ""},
		{"improvement everywhere", tol, Entry{Outcome: "pass", Steps: 40, MeanSpeedMPS: 0.82, PeakFrictionUtilization: 0.1, MinNormalForceN: 400, LatencyP99US: ptr(100)}, ""},
		{"outcome", tol, with(func(e *Entry) { e.Outcome = "tripped" }), "outcome tripped, baseline pass"},
		// steps: 30 − 2 allowed, 30 − 3 not.
		{"steps within", tol, with(func(e *Entry) { e.Steps = 28 }), ""},
		{"steps beyond", tol, with(func(e *Entry) { e.Steps = 27 }), "steps 27, baseline 30 (tolerance −2)"},
		{"steps, zero tolerance", Tolerances{}, with(func(e *Entry) { e.Steps = 29 }), "steps 29"},
		// speed: ±5 % of 0.8 is ±0.04, either way.
		{"speed within up", tol, with(func(e *Entry) { e.MeanSpeedMPS = 0.83 }), ""},
		{"speed within down", tol, with(func(e *Entry) { e.MeanSpeedMPS = 0.77 }), ""},
		{"speed beyond up", tol, with(func(e *Entry) { e.MeanSpeedMPS = 0.85 }), "mean speed 0.8500 m/s, baseline 0.8000 m/s (tolerance ±5%)"},
		{"speed beyond down", tol, with(func(e *Entry) { e.MeanSpeedMPS = 0.75 }), "mean speed 0.7500"},
		{"speed NaN", tol, with(func(e *Entry) { e.MeanSpeedMPS = math.NaN() }), "mean speed NaN"},
		// friction: +0.05 over 0.3.
		{"friction within", tol, with(func(e *Entry) { e.PeakFrictionUtilization = 0.34 }), ""},
		{"friction beyond", tol, with(func(e *Entry) { e.PeakFrictionUtilization = 0.36 }), "peak friction utilization 0.360, baseline 0.300 (tolerance +0.050)"},
		{"friction NaN", tol, with(func(e *Entry) { e.PeakFrictionUtilization = math.NaN() }), "peak friction utilization NaN"},
		// normal force: −10 % of 200 N is 180 N.
		{"normal force within", tol, with(func(e *Entry) { e.MinNormalForceN = 181 }), ""},
		{"normal force beyond", tol, with(func(e *Entry) { e.MinNormalForceN = 179 }), "minimum normal force 179.0 N, baseline 200.0 N (tolerance −10%)"},
		// latency: +50 % of 300 µs is 450 µs.
		{"latency within", tol, with(func(e *Entry) { e.LatencyP99US = ptr(449) }), ""},
		{"latency beyond", tol, with(func(e *Entry) { e.LatencyP99US = ptr(451) }), "p99 command latency 451 µs, baseline 300 µs (tolerance +50%)"},
		{"latency not measured", tol, with(func(e *Entry) { e.LatencyP99US = nil }), ""},
		// alarm kinds.
		{"new alarm kind", tol, with(func(e *Entry) { e.Alarms = map[string]int{"bad_frame": 2} }), "new alarm kind bad_frame (×2), none in the baseline"},
		{"new alarm kind allowed", Tolerances{StepsAbs: 2, SpeedRel: 1, FrictionAbs: 1, NormalForceRel: 1, LatencyP99Rel: 1}, with(func(e *Entry) { e.Alarms = map[string]int{"bad_frame": 2} }), ""},
		{"alarm counted zero", tol, with(func(e *Entry) { e.Alarms = map[string]int{"bad_frame": 0} }), ""},
	}
	for _, tt := range tests {
		got := Compare(goodEntry, tt.got, tt.tol)
		switch {
		case tt.msg == "" && len(got) != 0:
			t.Errorf("%s: unexpected regressions %q", tt.name, got)
		case tt.msg != "" && len(got) != 1:
			t.Errorf("%s: regressions %q, want exactly one mentioning %q", tt.name, got, tt.msg)
		case tt.msg != "" && !strings.Contains(got[0], tt.msg):
			t.Errorf("%s: regression %q does not say %q", tt.name, got[0], tt.msg)
		}
	}
}

func TestJudge(t *testing.T) {
	pass := record.Summary{Outcome: record.Pass, Steps: 30, MeanSpeedMPS: 0.8, PeakFrictionUtilization: 0.3, MinNormalForceN: 200}
	tripped := pass
	tripped.Outcome, tripped.Reason = record.Tripped, "fall"
	bl := &Baseline{Tolerances: DefaultTolerances, Scenarios: map[string]Entry{"walk": EntryOf(pass)}}
	tests := []struct {
		name     string
		bl       *Baseline
		scenario string
		s        record.Summary
		expected string
		want     []string
	}{
		{"no baseline, pass", nil, "walk", pass, "", nil},
		{"no baseline, tripped", nil, "walk", tripped, "", []string{"outcome tripped (fall)"}},
		{"baseline, same", bl, "walk", pass, "pass", nil},
		{"baseline, regression", bl, "walk", tripped, "pass", []string{"outcome tripped, baseline pass"}},
		{"missing scenario", bl, "new-one", pass, "", []string{"no baseline entry for this scenario"}},
	}
	for _, tt := range tests {
		expected, got := Judge(tt.bl, tt.scenario, tt.s)
		if expected != tt.expected || !reflect.DeepEqual(got, tt.want) {
			t.Errorf("%s: Judge = %q, %q; want %q, %q", tt.name, expected, got, tt.expected, tt.want)
		}
	}
}

func TestBaselineFile(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "baseline.json")
	entries := map[string]Entry{"walk": goodEntry, "nan": {Outcome: "fail", MeanSpeedMPS: math.NaN()}}
	tol := Tolerances{StepsAbs: 3, SpeedRel: 0.1, FrictionAbs: 0.2, NormalForceRel: 0.3, LatencyP99Rel: 0.4, NewAlarmKinds: false}
	if err := WriteBaseline(p, tol, entries); err != nil {
		t.Fatal(err)
	}
	bl, err := ReadBaseline(p)
	if err != nil {
		t.Fatal(err)
	}
	if bl.Tolerances != tol || !reflect.DeepEqual(bl.Scenarios["walk"], goodEntry) {
		t.Errorf("read back %+v, want tolerances %+v and entry %+v", bl, tol, goodEntry)
	}
	// NaN is written as null and reads back as zero, never as a bad file.
	if got := bl.Scenarios["nan"].MeanSpeedMPS; got != 0 {
		t.Errorf("NaN speed read back as %v, want 0 (null)", got)
	}

	// Tolerances a file leaves out take the defaults; new_alarm_kinds is
	// read as written.
	if err := os.WriteFile(p, []byte(`{"tolerances": {"steps_abs": 4, "new_alarm_kinds": false}, "scenarios": {}}`), 0o644); err != nil {
		t.Fatal(err)
	}
	if bl, err = ReadBaseline(p); err != nil {
		t.Fatal(err)
	}
	want := DefaultTolerances
	want.StepsAbs, want.NewAlarmKinds = 4, false
	if bl.Tolerances != want {
		t.Errorf("partial tolerances read as %+v, want %+v", bl.Tolerances, want)
	}
	if err := os.WriteFile(p, []byte(`{"scenarios": {"walk": {"outcome": "pass"}}}`), 0o644); err != nil {
		t.Fatal(err)
	}
	if bl, err = ReadBaseline(p); err != nil || bl.Tolerances != DefaultTolerances {
		t.Errorf("a file without tolerances: %+v, %v; want the defaults", bl, err)
	}

	for name, text := range map[string]string{"bad JSON": `{"scenarios": `, "bad tolerances": `{"tolerances": {"steps_abs": "many"}}`} {
		if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
		if _, err := ReadBaseline(p); !errors.Is(err, rig.ErrConfig) || !strings.Contains(err.Error(), p) {
			t.Errorf("%s: error %v, want a configuration error naming the file", name, err)
		}
	}
	if _, err := ReadBaseline(filepath.Join(dir, "missing.json")); !errors.Is(err, rig.ErrConfig) {
		t.Errorf("missing file: error %v, want a configuration error", err)
	}
}

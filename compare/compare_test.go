package compare_test

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"gaitrig/batch"
	"gaitrig/compare"
	"gaitrig/internal/headless"
	"gaitrig/record"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// runScenario records a lockstep run of a built-in scenario for seconds.
func runScenario(t *testing.T, name string, seconds float64) string {
	t.Helper()
	sc, err := scenarios.LoadBuiltin(name)
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), name)
	if _, err := rig.Run(context.Background(), sc, rig.Options{Link: "builtin", RunDir: dir, Duration: seconds, MaxSteps: -1}); err != nil {
		t.Fatal(err)
	}
	return dir
}

// copyRun copies a run folder, letting edit change telemetry.csv.
func copyRun(t *testing.T, src string, edit func(lines []string)) string {
	t.Helper()
	dst := filepath.Join(t.TempDir(), "copy")
	if err := os.CopyFS(dst, os.DirFS(src)); err != nil {
		t.Fatal(err)
	}
	p := filepath.Join(dst, record.TelemetryFile)
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(string(b), "\n")
	edit(lines)
	if err := os.WriteFile(p, []byte(strings.Join(lines, "\n")), 0o644); err != nil {
		t.Fatal(err)
	}
	return dst
}

// The same lockstep run twice agrees bit for bit and is within tolerances.
func TestSameRunTwice(t *testing.T) {
	a := runScenario(t, "level-demo", 2)
	b := runScenario(t, "level-demo", 2)
	r, err := compare.Runs(a, b)
	if err != nil {
		t.Fatal(err)
	}
	if !r.Within || !r.SameStart || r.Divergence != nil || r.ComparedTicks != 2000 || len(r.ScenarioDiffs) != 0 {
		t.Errorf("same run twice: within %v, same start %v, divergence %+v, %d ticks, %d scenario diffs", r.Within, r.SameStart, r.Divergence, r.ComparedTicks, len(r.ScenarioDiffs))
	}
	for _, s := range r.Steps {
		if s.Diff == nil || *s.Diff != (compare.StepDiff{}) {
			t.Errorf("step %d differs between identical runs: %+v", s.Index, s.Diff)
		}
	}
}

// A trajectory changed at a known tick and column is found there.
func TestFirstDivergenceIsFound(t *testing.T) {
	a := runScenario(t, "level-demo", 2)
	const tick = 1234
	col := -1
	b := copyRun(t, a, func(lines []string) {
		head := strings.Split(lines[0], ",")
		for i, h := range head {
			if h == "omega_right_radps" {
				col = i
			}
		}
		cells := strings.Split(lines[1+tick], ",")
		v, err := strconv.ParseFloat(cells[col], 64)
		if err != nil {
			t.Fatal(err)
		}
		cells[col] = strconv.FormatFloat(v*(1+1e-12)+1e-15, 'g', -1, 64)
		lines[1+tick] = strings.Join(cells, ",")
	})
	r, err := compare.Runs(a, b)
	if err != nil {
		t.Fatal(err)
	}
	if d := r.Divergence; d == nil || d.Tick != tick || d.Field != "omega_right_radps" {
		t.Fatalf("divergence %+v, want tick %d in omega_right_radps", d, tick)
	}
}

// Different scenarios: the scenario differences are listed, the
// trajectories are not compared, and the verdict is batch.Compare's.
func TestDifferentScenarios(t *testing.T) {
	a := runScenario(t, "level-demo", 3)
	b := runScenario(t, "low-friction-patch", 3)
	r, err := compare.Runs(a, b)
	if err != nil {
		t.Fatal(err)
	}
	if r.SameStart || r.Divergence != nil {
		t.Errorf("different scenarios compared tick by tick: %+v", r.Divergence)
	}
	found := false
	for _, d := range r.ScenarioDiffs {
		if d.Field == "name" && d.A == "level-demo" && d.B == "low-friction-patch" {
			found = true
		}
	}
	if !found {
		t.Errorf("the scenario names are not among the differences: %+v", r.ScenarioDiffs)
	}
	ra, _ := record.Open(a)
	rb, _ := record.Open(b)
	want := batch.Compare(batch.EntryOf(*ra.Summary), batch.EntryOf(*rb.Summary), batch.DefaultTolerances)
	if r.Within != (len(want) == 0) || len(r.Regressions) != len(want) {
		t.Errorf("verdict within=%v %q; batch.Compare says %q", r.Within, r.Regressions, want)
	}
}

// The page in headless Chromium: verdict, charts drawn, tables, caution.
func TestPageInChromium(t *testing.T) {
	if ok, required := headless.Available(); !ok {
		if required {
			t.Fatal("chromium not found and GAITRIG_REQUIRE_TOOLS=1")
		}
		t.Skip("chromium not found")
	}
	a := runScenario(t, "level-demo", 3)
	b := runScenario(t, "low-friction-patch", 3)
	r, err := compare.Runs(a, b)
	if err != nil {
		t.Fatal(err)
	}
	var page bytes.Buffer
	if err := r.WriteHTML(&page); err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "compare.html")
	if err := os.WriteFile(path, page.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	br, err := headless.Start(t.TempDir(), 1400, 1000, 60*time.Second)
	if err != nil {
		t.Fatal(err)
	}
	defer br.Close()
	if err := br.Navigate("file://"+path, 20*time.Second); err != nil {
		t.Fatal(err)
	}
	if err := br.WaitFor(`document.readyState === "complete"`, 60*time.Second); err != nil {
		t.Fatal(err)
	}
	var got struct {
		Charts, Paths, StepRows, DiffRows int
		Verdict, Caution                  string
	}
	if err := br.Eval(`({Charts: document.querySelectorAll(".charts svg").length,
		Paths: document.querySelectorAll(".charts svg path").length,
		StepRows: document.querySelectorAll("#steps tr").length - 1,
		DiffRows: document.querySelectorAll("#scenario-diffs tr").length - 1,
		Verdict: document.getElementById("verdict").textContent,
		Caution: document.getElementById("caution").textContent})`, &got, 20*time.Second); err != nil {
		t.Fatal(err)
	}
	// Two joints, two feet of normal force and of utilization: 6 overlays
	// of two runs each.
	if got.Charts != 6 || got.Paths < 12 {
		t.Errorf("%d charts with %d lines, want 6 with two runs each", got.Charts, got.Paths)
	}
	if got.StepRows != len(r.Steps) || got.DiffRows != len(r.ScenarioDiffs) {
		t.Errorf("page has %d step rows and %d scenario rows; the result %d and %d", got.StepRows, got.DiffRows, len(r.Steps), len(r.ScenarioDiffs))
	}
	if want := map[bool]string{true: "within", false: "outside"}[r.Within]; !strings.Contains(got.Verdict, want) {
		t.Errorf("verdict %q, want %q", got.Verdict, want)
	}
	if got.Caution != record.Caution {
		t.Errorf("caution %q", got.Caution)
	}
	if dir := os.Getenv("GAITRIG_SCREENSHOT_DIR"); dir != "" {
		shot, err := br.Screenshot(20 * time.Second)
		if err != nil {
			t.Fatal(err)
		}
		os.WriteFile(filepath.Join(dir, "compare.png"), shot, 0o644)
	}
}

// Two runs the host spoiled (outcome invalid) say nothing about the
// firmware, so they are never "within tolerances" of each other, even
// when every number agrees.
func TestInvalidRunsAreNeverWithinTolerances(t *testing.T) {
	a := runScenario(t, "level-demo", 1)
	invalid := func(src string) string {
		dst := copyRun(t, src, func([]string) {})
		p := filepath.Join(dst, record.SummaryFile)
		b, err := os.ReadFile(p)
		if err != nil {
			t.Fatal(err)
		}
		var s record.Summary
		if err := s.UnmarshalJSON(b); err != nil {
			t.Fatal(err)
		}
		s.Outcome, s.Reason = record.Invalid, "host_stall: the rig was not running for 120.0 ms"
		if b, err = s.MarshalJSON(); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(p, b, 0o644); err != nil {
			t.Fatal(err)
		}
		return dst
	}
	for _, tc := range []struct {
		name string
		a, b string
	}{
		{"both invalid", invalid(a), invalid(a)},
		{"B invalid", a, invalid(a)},
	} {
		r, err := compare.Runs(tc.a, tc.b)
		if err != nil {
			t.Fatal(err)
		}
		if r.Within || !strings.Contains(strings.Join(r.Regressions, "\n"), "invalid") {
			t.Errorf("%s: within %v, regressions %q; want outside, saying a run is invalid", tc.name, r.Within, r.Regressions)
		}
	}
}

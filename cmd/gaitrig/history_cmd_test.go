package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestHistoryOfRunsAndSuites stores a run and two suite nights in a SQLite
// history (the DSN once by flag, once from the environment, with the
// revision from flag and environment), then reads the trend back with
// gaitrig history --json and --page.
func TestHistoryOfRunsAndSuites(t *testing.T) {
	root := t.TempDir()
	dsn := "sqlite:" + filepath.Join(root, "history.db")
	lib := "../../scenarios/library/slope-change.yaml"
	if code, out, errOut := run(t, "run", "--quiet", "--no-report", "--out", filepath.Join(root, "runs"), "--history", dsn, "--firmware-revision", "r1", lib); code != exitPass {
		t.Fatalf("run --history: exit %d\n%s%s", code, out, errOut)
	}
	t.Setenv("GAITRIG_HISTORY", dsn)
	t.Setenv("GAITRIG_FIRMWARE_REVISION", "r2")
	if code, out, errOut := run(t, "suite", "--no-report", "--out", filepath.Join(root, "runs"), lib); code != exitPass {
		t.Fatalf("suite with GAITRIG_HISTORY: exit %d\n%s%s", code, out, errOut)
	}
	os.Unsetenv("GAITRIG_HISTORY")
	page := filepath.Join(root, "trend.html")
	code, stdout, errOut := run(t, "history", "--json", "--history", dsn, "--scenario", "slope-change", "--page", page)
	var h historyResult
	if err := json.Unmarshal([]byte(stdout), &h); err != nil {
		t.Fatalf("%v\n%s%s", err, stdout, errOut)
	}
	if code != exitPass || len(h.Scenarios) != 1 || h.Scenarios[0].Builds != 2 || h.Drifting != 0 {
		t.Fatalf("history: exit %d, %+v", code, h)
	}
	for _, tr := range h.Scenarios[0].Trends {
		if len(tr.Points) != 2 || tr.Points[0].Build != "r1" || tr.Points[1].Build != "r2" {
			t.Errorf("%s: points %+v, want builds r1 then r2", tr.Name, tr.Points)
		}
		// Lockstep is bit-repeatable: both builds of the same firmware
		// show the same figures.
		if tr.Name == "mean_speed_mps" && (tr.Points[0].Value != tr.Points[1].Value || tr.Points[0].Value <= 0) {
			t.Errorf("speed %v then %v", tr.Points[0].Value, tr.Points[1].Value)
		}
	}
	if b, err := os.ReadFile(page); err != nil || !strings.Contains(string(b), "not a safety certificate") {
		t.Errorf("page: %v", err)
	}
	if code, _, errOut := run(t, "history", "--history", "sqlite:"+filepath.Join(root, "history.db"), "--scenario", "no-such"); code != exitConfig || !strings.Contains(errOut, "no stored results") {
		t.Errorf("an unknown scenario: exit %d\n%s", code, errOut)
	}
	if code, _, errOut := run(t, "run", "--history", "mysql://x", lib); code != exitConfig || !strings.Contains(errOut, "want sqlite:PATH") {
		t.Errorf("a bad DSN: exit %d\n%s", code, errOut)
	}
}

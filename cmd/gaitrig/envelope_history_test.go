package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gaitrig/scenarios"
)

// TestEnvelopeHistory stores a margin search (DSN from the environment),
// a stability estimate and a preflight (DSN by flag) of the demo in a
// SQLite history, and reads them back with gaitrig history --json: the
// margin and the spectral radius are followed next to the runs' figures,
// and the preflight stored one run per check.
func TestEnvelopeHistory(t *testing.T) {
	if testing.Short() {
		t.Skip("lockstep walks")
	}
	root := t.TempDir()
	dsn := "sqlite:" + filepath.Join(root, "history.db")
	text, err := scenarios.BuiltinText("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	file := filepath.Join(root, "level-demo.yaml")
	text = append(text, []byte("margins:\n  axes: [added_latency]\n  min_added_latency_ms: 5\n")...)
	if err := os.WriteFile(file, text, 0o644); err != nil {
		t.Fatal(err)
	}
	t.Setenv("GAITRIG_HISTORY", dsn)
	if code, out, errOut := run(t, "margins", "--out", filepath.Join(root, "runs"), "--firmware-revision", "r1", file); code != exitPass {
		t.Fatalf("margins with GAITRIG_HISTORY: exit %d\n%s%s", code, out, errOut)
	}
	os.Unsetenv("GAITRIG_HISTORY")
	if code, out, errOut := run(t, "stability", "--out", filepath.Join(root, "runs"), "--steps", "20", "--push", "-1", "--step-down", "-1",
		"--history", dsn, "--firmware-revision", "r1", file); code != exitPass {
		t.Fatalf("stability --history: exit %d\n%s%s", code, out, errOut)
	}
	if code, out, errOut := run(t, "preflight", "--out", filepath.Join(root, "runs"), "--scenario", file, "--history", dsn, "--firmware-revision", "r2"); code != exitPass {
		t.Fatalf("preflight --history: exit %d\n%s%s", code, out, errOut)
	}
	code, stdout, errOut := run(t, "history", "--json", "--history", dsn)
	var h historyResult
	if err := json.Unmarshal([]byte(stdout), &h); err != nil {
		t.Fatalf("%v\n%s%s", err, stdout, errOut)
	}
	if code != exitPass {
		t.Fatalf("history: exit %d\n%s", code, errOut)
	}
	var names []string
	for _, p := range h.Scenarios {
		names = append(names, p.Scenario)
		if p.Scenario != "level-demo" {
			continue
		}
		got := map[string][]float64{}
		for _, tr := range p.Trends {
			for _, pt := range tr.Points {
				got[tr.Name] = append(got[tr.Name], pt.Value)
			}
		}
		// margins (r1) and the preflight's envelope (r2) hold the latency
		// margin; stability (r1) and the preflight the spectral radius.
		if m := got["margin_added_latency"]; len(m) != 2 || m[0] < 5 || m[0] != m[1] {
			t.Errorf("latency margin %v: want the same limit (≥ 5 ms) from margins and preflight", m)
		}
		if r := got["spectral_radius"]; len(r) != 2 || r[0] <= 0 || r[0] >= 1 || r[1] <= 0 || r[1] >= 1 {
			t.Errorf("spectral radius %v", r)
		}
		if n := len(got["steps"]); n != 0 {
			t.Errorf("%d run results under level-demo: the checks are stored under their own names", n)
		}
	}
	if s := strings.Join(names, ","); !strings.Contains(s, "level-demo-nominal") || !strings.Contains(s, "level-demo-sensor-noise") || !strings.Contains(s, "level-demo,") {
		t.Errorf("scenarios in the history: %s", s)
	}
}

// TestPreflightSeedsEveryCheckCommand: preflight --seeds 2 --json gives
// every check of the battery its two seeds' runs, pass rate and Wilson
// interval, and names the worst run's folder as the check's run folder.
func TestPreflightSeedsEveryCheckCommand(t *testing.T) {
	if testing.Short() {
		t.Skip("lockstep walks")
	}
	code, out, errOut := run(t, "preflight", "--out", t.TempDir(), "--seeds", "2", "--envelope=false", "--json")
	if code != exitPass {
		t.Fatalf("exit %d\n%s", code, errOut)
	}
	var res preflightResult
	if err := json.Unmarshal([]byte(out), &res); err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	if len(res.Checks) != 7 {
		t.Fatalf("%d checks", len(res.Checks))
	}
	for _, c := range res.Checks {
		sr := c.Seeds
		if sr == nil || len(sr.Runs) != 2 || sr.Passed != 2 || sr.N != 2 || sr.Low <= 0 || sr.High != 1 || c.RunFolder != sr.Runs[sr.Worst].Dir {
			t.Errorf("%s: seeds %+v, run folder %s", c.Name, sr, c.RunFolder)
			continue
		}
		if sr.Runs[0].Seed == sr.Runs[1].Seed {
			t.Errorf("%s: both runs with seed %d", c.Name, sr.Runs[0].Seed)
		}
	}
	if code, _, errOut := run(t, "preflight", "--seeds", "0"); code != exitConfig || !strings.Contains(errOut, "--seeds") {
		t.Errorf("--seeds 0: exit %d\n%s", code, errOut)
	}
}

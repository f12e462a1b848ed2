package batch

import (
	"bytes"
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"

	"gaitrig/record"
	"gaitrig/report"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// TestPreflightOfTheDemo runs the whole battery on the built-in demo
// scenario against the built-in firmware through rig.Run, with three
// explicit zeros in its sensor block (no encoder quantization, a contact
// threshold of 0 N, seed 0; the defaults are 4096, 5 N and 1). It checks
// what the battery ran against the record the runs left on disk: one run
// per check in battery order, each manifest holding the variant's text,
// each run replaying from its folder, the nominal check identical to a
// plain run of the scenario as written, and the verdict equal to "every
// summary.json says pass".
func TestPreflightOfTheDemo(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the seven checks of the battery; skipped with -short")
	}
	text, err := scenarios.BuiltinText("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	text = append(text, "sensors:\n  encoder_counts_per_rev: 0\n  contact_threshold_n: 0\n  seed: 0\n"...)
	base, err := scenarios.Parse("level-demo-zeros.yaml", text)
	if err != nil {
		t.Fatal(err)
	}
	root := t.TempDir()
	p := Preflight{Dir: filepath.Join(root, "preflight"), Link: "builtin", Jobs: 2}
	variants, err := p.Variants(base)
	if err != nil {
		t.Fatal(err)
	}
	var mu sync.Mutex
	calls := map[string]int{}
	p.Runner = func(ctx context.Context, sc *scenarios.Scenario, o rig.Options) (rig.Result, error) {
		mu.Lock()
		calls[sc.Name]++
		mu.Unlock()
		return rig.Run(ctx, sc, o)
	}
	res, err := p.Run(context.Background(), variants)
	if err != nil {
		t.Fatal(err)
	}
	battery := Battery()
	if len(res.Checks) != len(battery) || len(calls) != len(battery) {
		t.Fatalf("%d checks, %d distinct runs; want %d", len(res.Checks), len(calls), len(battery))
	}
	allPass := true
	for i, c := range res.Checks {
		name := "level-demo-" + battery[i].Name
		if c.Check.Name != battery[i].Name || c.Job.Scenario.Name != name || calls[name] != 1 {
			t.Errorf("check %d is %s (%s), run %d times; want %s once", i, c.Check.Name, c.Job.Scenario.Name, calls[name], name)
		}
		if c.Err != nil {
			t.Errorf("%s: %v", name, c.Err)
			allPass = false
			continue
		}
		dir := filepath.Join(p.Dir, name)
		run, err := record.Open(dir)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if run.Manifest.ScenarioText != string(c.Job.Scenario.Text) || run.Manifest.ScenarioHash != scenarios.Hash(c.Job.Scenario.Text) {
			t.Errorf("%s: the manifest does not hold the variant's text and hash", name)
		}
		if run.Summary == nil || run.Summary.Outcome != c.Result.Summary.Outcome {
			t.Errorf("%s: summary on disk %v, result %s", name, run.Summary, c.Result.Summary.Outcome)
		}
		if run.Summary != nil && run.Summary.Outcome != record.Pass {
			allPass = false
		}
		if c.Pass != (run.Summary != nil && run.Summary.Outcome == record.Pass) || c.Pass != (len(c.Problems) == 0) {
			t.Errorf("%s: Pass %v with problems %q and outcome on disk %v", name, c.Pass, c.Problems, run.Summary)
		}
		if _, err := os.Stat(filepath.Join(dir, report.HTMLFile)); err != nil {
			t.Errorf("%s: no report: %v", name, err)
		}
		if rr, err := rig.Replay(dir); err != nil || !rr.Match {
			t.Errorf("%s: the run does not replay from its folder: %v %v", name, rr, err)
		}
		var m struct {
			Seed *int64 `json:"seed"`
		}
		if b, err := os.ReadFile(filepath.Join(dir, record.ManifestFile)); err != nil || json.Unmarshal(b, &m) != nil || m.Seed == nil || *m.Seed != 0 {
			t.Errorf("%s: manifest seed %v, want the explicit 0 (%v)", name, m.Seed, err)
		}
	}
	if res.Go != allPass {
		t.Errorf("verdict GO=%v, but every summary on disk passing is %v", res.Go, allPass)
	}

	// The nominal check is the scenario as written: the same run, bit for
	// bit, as a plain run of base.
	plain, err := rig.Run(context.Background(), base, rig.Options{Link: "builtin", RunDir: filepath.Join(root, "plain")})
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range []string{record.SummaryFile, record.StepsFile} {
		a, errA := os.ReadFile(filepath.Join(plain.Dir, f))
		b, errB := os.ReadFile(filepath.Join(p.Dir, "level-demo-nominal", f))
		if errA != nil || errB != nil {
			t.Fatal(errA, errB)
		}
		if a, b = wallTime.ReplaceAll(a, nil), wallTime.ReplaceAll(b, nil); !bytes.Equal(a, b) {
			t.Errorf("nominal check and the scenario as written differ in %s:\n%s\n---\n%s", f, a, b)
		}
	}

	// Half friction ran on half the friction, as its text says.
	half := res.Checks[1].Job.Scenario
	if half.Terrain.Segments[0].MuStatic != base.Terrain.Segments[0].MuStatic/2 || !strings.Contains(string(half.Text), "mu_static: 0.4\n") {
		t.Errorf("half-friction variant has μ_s %v", half.Terrain.Segments[0].MuStatic)
	}

	junit := filepath.Join(root, "junit.xml")
	if err := WriteJUnit(junit, "gaitrig preflight", res.Results); err != nil {
		t.Fatal(err)
	}
	x, err := os.ReadFile(junit)
	if err != nil || bytes.Count(x, []byte("<testcase")) != len(battery) {
		t.Errorf("JUnit file with %d test cases, want %d (%v)", bytes.Count(x, []byte("<testcase")), len(battery), err)
	}
}

func TestPreflightRefusesAMismatchedBattery(t *testing.T) {
	if _, err := (Preflight{Dir: t.TempDir()}).Run(context.Background(), nil); err == nil {
		t.Error("a preflight with no variants for seven checks ran")
	}
}

package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gaitrig/batch"
)

// TestShardedSuiteMergesToTheUnshardedExitCode runs a small library (one
// scenario quarantined and regressing, one regressing) as one suite and as
// two shards picked by JOB_COMPLETION_INDEX, merges the shards, and wants
// the same verdicts and exit code; a link that cannot be opened gives exit
// code 3 and JUnit errors.
func TestShardedSuiteMergesToTheUnshardedExitCode(t *testing.T) {
	root := t.TempDir()
	lib := filepath.Join(root, "lib")
	if err := os.MkdirAll(lib, 0o755); err != nil {
		t.Fatal(err)
	}
	for _, n := range []string{"level-demo", "slope-change", "passive-downhill"} {
		text, err := os.ReadFile("../../scenarios/library/" + n + ".yaml")
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(lib, n+".yaml"), text, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	base := filepath.Join(lib, "baseline.json")
	if code, out, errOut := run(t, "suite", "--out", filepath.Join(root, "first"), "--no-report", "--write-baseline", base, lib); code != exitPass {
		t.Fatalf("first run: exit %d\n%s%s", code, out, errOut)
	}
	bl, err := batch.ReadBaseline(base)
	if err != nil {
		t.Fatal(err)
	}
	for _, n := range []string{"level-demo", "slope-change"} {
		e := bl.Scenarios[n]
		e.Steps += 5
		bl.Scenarios[n] = e
	}
	if err := batch.WriteBaseline(base, bl.Tolerances, bl.Scenarios); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(lib, batch.SuiteConfigFile), []byte("quarantine: [slope-change]\n"), 0o644); err != nil {
		t.Fatal(err)
	}

	code, stdout, errOut := run(t, "suite", "--json", "--out", filepath.Join(root, "whole"), "--no-report", lib)
	var whole suiteResult
	if err := json.Unmarshal([]byte(stdout), &whole); err != nil {
		t.Fatalf("%v\n%s", err, errOut)
	}
	if code != exitFail || whole.Failed != 1 || whole.Quarantined != 1 {
		t.Fatalf("unsharded: exit %d, failed %d, quarantined %d; want 1, 1, 1\n%s", code, whole.Failed, whole.Quarantined, errOut)
	}
	var dirs []string
	t.Setenv(batch.ShardCountEnv, "2")
	for k := range 2 {
		t.Setenv(batch.IndexedJobEnv, string(rune('0'+k)))
		_, stdout, errOut := run(t, "suite", "--json", "--out", filepath.Join(root, "shards"), "--no-report", lib)
		var s suiteResult
		if err := json.Unmarshal([]byte(stdout), &s); err != nil {
			t.Fatalf("%v\n%s", err, errOut)
		}
		if s.Shard != string(rune('1'+k))+"/2" {
			t.Errorf("shard %q from the environment, want %d/2", s.Shard, k+1)
		}
		dirs = append(dirs, s.SuiteFolder)
	}
	os.Unsetenv(batch.IndexedJobEnv)
	code2, stdout, errOut := run(t, append([]string{"merge", "--json", "--out", filepath.Join(root, "merged")}, dirs...)...)
	var merged suiteResult
	if err := json.Unmarshal([]byte(stdout), &merged); err != nil {
		t.Fatalf("%v\n%s", err, errOut)
	}
	if code2 != code || merged.Failed != whole.Failed || merged.Quarantined != whole.Quarantined || len(merged.Scenarios) != len(whole.Scenarios) {
		t.Fatalf("merged: exit %d, %+v; unsharded exit %d, %+v", code2, merged, code, whole)
	}
	for i, w := range whole.Scenarios {
		g := merged.Scenarios[i]
		if g.Scenario != w.Scenario || g.Verdict != w.Verdict || g.Quarantined != w.Quarantined || strings.Join(g.Regressions, ";") != strings.Join(w.Regressions, ";") {
			t.Errorf("merged %+v, unsharded %+v", g, w)
		}
	}
	for _, s := range append(merged.Scenarios, whole.Scenarios...) {
		// The run folders named, and the one the pages link to (relative
		// to the page's folder), are the runs' folders.
		if _, err := os.Stat(filepath.Join(s.RunFolder, "summary.json")); err != nil {
			t.Errorf("%s: run folder %s: %v", s.Scenario, s.RunFolder, err)
		}
	}
	sum, err := batch.ReadSuiteSummary(merged.SuiteFolder)
	if err != nil {
		t.Fatal(err)
	}
	for _, s := range sum.Scenarios {
		if _, err := os.Stat(filepath.Join(merged.SuiteFolder, s.RunFolder, "summary.json")); err != nil {
			t.Errorf("%s: run folder %s relative to the merged folder: %v", s.Scenario, s.RunFolder, err)
		}
	}
	for _, f := range []string{merged.JUnit, merged.Summary, merged.Page} {
		if _, err := os.Stat(f); err != nil {
			t.Error(err)
		}
	}
	if code, _, errOut := run(t, "merge", "--out", filepath.Join(root, "merged"), dirs[0]); code != exitConfig || !strings.Contains(errOut, "shard 2/2 missing") {
		t.Errorf("merge of one of two shards: exit %d\n%s", code, errOut)
	}

	// Nothing regressed, but the link never opened: exit 3, JUnit errors.
	code, out, errOut := run(t, "suite", "--out", filepath.Join(root, "dead"), "--no-report", "--retries", "0",
		"--link", "serial:"+filepath.Join(root, "no-such-port"), "../../scenarios/library/level-demo.yaml")
	if code != exitInvalid || !strings.Contains(out, "INFRASTRUCTURE") {
		t.Errorf("a dead link: exit %d, want %d\n%s%s", code, exitInvalid, out, errOut)
	}
}

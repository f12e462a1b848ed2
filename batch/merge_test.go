package batch

import (
	"context"
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"gaitrig/rig"
	"gaitrig/scenarios"
)

// lockstepLibrary loads the built-in library without its wall-clock
// scenarios: a wall-clock run's latency figures (and so its verdict)
// depend on how busy the host is, so two runs of it never agree figure for
// figure, sharded or not. Every lockstep scenario is bit-repeatable.
func lockstepLibrary(t *testing.T) []*scenarios.Scenario {
	t.Helper()
	src, err := Sources([]string{"builtin"})
	if err != nil {
		t.Fatal(err)
	}
	all, errs := Load(src)
	if len(errs) > 0 {
		t.Fatal(errs)
	}
	var out []*scenarios.Scenario
	for _, sc := range all {
		if Shareable(sc, "", "") {
			out = append(out, sc)
		}
	}
	if len(out) < 6 {
		t.Fatalf("only %d lockstep scenarios in the library; the merge test needs a campaign", len(out))
	}
	return out
}

// runSummary runs a suite of scs as shard sh of total and returns its
// summary as merge would read it: written to suite.json and read back.
func runSummary(t *testing.T, dir string, sh Shard, total int, scs []*scenarios.Scenario, blPath string) SuiteSummary {
	t.Helper()
	var bl *Baseline
	if blPath != "" {
		var err error
		if bl, err = ReadBaseline(blPath); err != nil {
			t.Fatal(err)
		}
	}
	res := Suite{Dir: dir, Jobs: 2, Baseline: bl}.Run(context.Background(), scs)
	s, err := SummaryOf(res, sh, total, blPath, bl)
	if err != nil {
		t.Fatal(err)
	}
	if err := WriteSuiteSummary(dir, s); err != nil {
		t.Fatal(err)
	}
	back, err := ReadSuiteSummary(dir)
	if err != nil {
		t.Fatal(err)
	}
	return back
}

// sameResult compares two suite summaries field by field, everything but
// wall times, run folder paths and the shard list.
func sameResult(t *testing.T, what string, got, want SuiteSummary) {
	t.Helper()
	if got.Failed != want.Failed || got.Infrastructure != want.Infrastructure || got.Quarantined != want.Quarantined || got.Total != want.Total {
		t.Errorf("%s: counts failed/infrastructure/quarantined/total %d/%d/%d/%d, unsharded %d/%d/%d/%d", what,
			got.Failed, got.Infrastructure, got.Quarantined, got.Total, want.Failed, want.Infrastructure, want.Quarantined, want.Total)
	}
	if got.BaselineSHA256 != want.BaselineSHA256 || !reflect.DeepEqual(got.Tolerances, want.Tolerances) {
		t.Errorf("%s: baseline %s %+v, unsharded %s %+v", what, got.BaselineSHA256, got.Tolerances, want.BaselineSHA256, want.Tolerances)
	}
	if len(got.Scenarios) != len(want.Scenarios) {
		t.Fatalf("%s: %d scenarios, unsharded %d", what, len(got.Scenarios), len(want.Scenarios))
	}
	for i := range want.Scenarios {
		g, w := got.Scenarios[i], want.Scenarios[i]
		if g.RunFolder == "" {
			t.Errorf("%s: %s has no run folder", what, g.Scenario)
		}
		g.Seconds, w.Seconds, g.RunFolder, w.RunFolder = 0, 0, "", ""
		if !reflect.DeepEqual(g, w) {
			t.Errorf("%s: scenario %d differs:\n got %+v\nwant %+v", what, i, g, w)
			if g.Figures != nil && w.Figures != nil {
				t.Errorf("  figures got %+v\n  want %+v", *g.Figures, *w.Figures)
			}
		}
	}
}

// TestShardsMergedEqualUnsharded runs the lockstep part of the built-in
// library as one suite and as three shards, merges the shards, and
// requires the same verdicts and figures field by field: without a
// baseline, and judged against one (a baseline entry made stricter so one
// scenario regresses), once with the merge judging the shards again and
// once with shards that were judged by themselves.
func TestShardsMergedEqualUnsharded(t *testing.T) {
	scs := lockstepLibrary(t)
	root := t.TempDir()
	whole := runSummary(t, filepath.Join(root, "whole"), AllShards, len(scs), scs, "")

	var parts []SuiteSummary
	var dirs []string
	for k := 1; k <= 3; k++ {
		sh := Shard{k, 3}
		dir := filepath.Join(root, "shard", sh.String()[:1])
		parts = append(parts, runSummary(t, dir, sh, len(scs), Pick(sh, scs), ""))
		dirs = append(dirs, dir)
	}
	merged, err := Merge(parts, dirs, nil, "")
	if err != nil {
		t.Fatal(err)
	}
	sameResult(t, "merged without baseline", merged, whole)
	if !reflect.DeepEqual(merged.Shards, []string{"1/3", "2/3", "3/3"}) {
		t.Errorf("merged shards %q", merged.Shards)
	}
	for _, v := range merged.Scenarios {
		if !strings.HasPrefix(v.RunFolder, filepath.Join(root, "shard")) {
			t.Errorf("%s: merged run folder %s is not in its shard's folder", v.Scenario, v.RunFolder)
		}
	}

	// A baseline from the unsharded figures, one entry made stricter
	// than its run can meet: that scenario must regress in both.
	entries := whole.Entries()
	strict := scs[0].Name
	e := entries[strict]
	e.Steps += 3
	entries[strict] = e
	blPath := filepath.Join(root, "baseline.json")
	if err := WriteBaseline(blPath, DefaultTolerances, entries); err != nil {
		t.Fatal(err)
	}
	bl, err := ReadBaseline(blPath)
	if err != nil {
		t.Fatal(err)
	}
	wholeB := runSummary(t, filepath.Join(root, "whole-b"), AllShards, len(scs), scs, blPath)
	if wholeB.Failed != 1 || wholeB.Scenarios[indexOf(wholeB, strict)].Verdict != VerdictRegressed {
		t.Fatalf("the stricter baseline entry of %s did not regress: %+v", strict, wholeB.Scenarios)
	}
	mergedB, err := Merge(parts, dirs, bl, blPath)
	if err != nil {
		t.Fatal(err)
	}
	sameResult(t, "merged and judged against the baseline", mergedB, wholeB)

	// The shard holding the stricter entry's scenario judged by itself
	// against the baseline; the others keep theirs (no baseline): merge
	// refuses to mix them without a baseline of its own.
	k := indexIn(scs, strict)%3 + 1
	judged := runSummary(t, filepath.Join(root, "judged"), Shard{k, 3}, len(scs), Pick(Shard{k, 3}, scs), blPath)
	mixed := append([]SuiteSummary(nil), parts...)
	mixed[k-1] = judged
	if _, err := Merge(mixed, nil, nil, ""); !errors.Is(err, rig.ErrConfig) || !strings.Contains(err.Error(), "different contents") {
		t.Errorf("merge of shards judged against different baselines: %v", err)
	}
	got, err := Merge(mixed, nil, bl, blPath)
	if err != nil {
		t.Fatal(err)
	}
	sameResult(t, "mixed shards merged against the baseline", got, wholeB)
}

func indexOf(s SuiteSummary, name string) int {
	for i, v := range s.Scenarios {
		if v.Scenario == name {
			return i
		}
	}
	return -1
}

func indexIn(scs []*scenarios.Scenario, name string) int {
	for i, s := range scs {
		if s.Name == name {
			return i
		}
	}
	return -1
}

// TestMergeRefusesShardsThatDoNotFit: a shard missing, given twice, of
// another count, a scenario in two shards.
func TestMergeRefusesShardsThatDoNotFit(t *testing.T) {
	part := func(shard string, total int, names ...string) SuiteSummary {
		s := SuiteSummary{SchemaVersion: 1, Shards: []string{shard}, Total: total}
		for _, n := range names {
			f := Entry{Outcome: "pass", Steps: 10}
			s.Scenarios = append(s.Scenarios, ScenarioVerdict{Scenario: n, Verdict: VerdictOK, Outcome: "pass", Figures: &f, Attempts: 1})
		}
		return s
	}
	for _, c := range []struct {
		name  string
		parts []SuiteSummary
		want  string
	}{
		{"missing", []SuiteSummary{part("1/3", 3, "a"), part("3/3", 3, "c")}, "shard 2/3 missing"},
		{"twice", []SuiteSummary{part("1/2", 2, "a"), part("1/2", 2, "b")}, "shard 1/2 is both"},
		{"counts", []SuiteSummary{part("1/2", 2, "a"), part("2/3", 2, "b")}, "is of 2 shards"},
		{"libraries", []SuiteSummary{part("1/2", 2, "a"), part("2/2", 3, "b")}, "same library"},
		{"duplicate", []SuiteSummary{part("1/2", 2, "a"), part("2/2", 2, "a")}, "scenario a is in"},
		{"bad shard", []SuiteSummary{part("0/2", 2, "a")}, "want K/N"},
		{"none", nil, "no shard summaries"},
	} {
		_, err := Merge(c.parts, nil, nil, "")
		if !errors.Is(err, rig.ErrConfig) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v, want one containing %q", c.name, err, c.want)
		}
	}
	got, err := Merge([]SuiteSummary{part("2/2", 2, "b"), part("1/2", 2, "a")}, nil, nil, "")
	if err != nil || len(got.Scenarios) != 2 || got.Scenarios[0].Scenario != "a" || got.Failed != 0 {
		t.Errorf("merge of two fitting shards: %+v, %v", got, err)
	}
}

func TestShardFrom(t *testing.T) {
	env := func(kv ...string) func(string) string {
		m := map[string]string{}
		for i := 0; i+1 < len(kv); i += 2 {
			m[kv[i]] = kv[i+1]
		}
		return func(k string) string { return m[k] }
	}
	for _, c := range []struct {
		flag  string
		count int
		env   func(string) string
		want  Shard
		err   string
	}{
		{"", 0, env(), AllShards, ""},
		{"2/4", 0, env(IndexedJobEnv, "0"), Shard{2, 4}, ""}, // the flag wins
		{"", 3, env(IndexedJobEnv, "0"), Shard{1, 3}, ""},
		{"", 0, env(IndexedJobEnv, "2", ShardCountEnv, "3"), Shard{3, 3}, ""},
		{"", 4, env(IndexedJobEnv, "2", ShardCountEnv, "3"), Shard{3, 4}, ""}, // the flag over the variable
		{"", 0, env(IndexedJobEnv, "1"), Shard{}, "no shard count"},
		{"", 3, env(IndexedJobEnv, "3"), Shard{}, "outside 3 shards"},
		{"", 3, env(IndexedJobEnv, "-1"), Shard{}, "completion index"},
		{"", 3, env(IndexedJobEnv, "x"), Shard{}, "completion index"},
		{"", 0, env(IndexedJobEnv, "0", ShardCountEnv, "0"), Shard{}, "count of shards"},
		{"", 3, env(), Shard{}, "without JOB_COMPLETION_INDEX"},
		{"1/2", 2, env(), Shard{}, "give one"},
		{"", -1, env(IndexedJobEnv, "0"), Shard{}, "count of shards"},
	} {
		got, err := ShardFrom(c.flag, c.count, c.env)
		if c.err == "" {
			if err != nil || got != c.want {
				t.Errorf("ShardFrom(%q, %d) = %v, %v; want %v", c.flag, c.count, got, err, c.want)
			}
			continue
		}
		if !errors.Is(err, rig.ErrConfig) || !strings.Contains(err.Error(), c.err) {
			t.Errorf("ShardFrom(%q, %d): error %v, want one containing %q", c.flag, c.count, err, c.err)
		}
	}
}

// TestReadSuiteSummaryRefusesWhatItCannotTrust: a missing file, another
// schema, a verdict it does not know, text that is not a summary.
func TestReadSuiteSummaryRefusesWhatItCannotTrust(t *testing.T) {
	for _, c := range []struct{ text, want string }{
		{"", "no such file"},
		{`{"schema_version": 2, "scenarios": []}`, "schema_version 2"},
		{`{"schema_version": 1, "scenarios": [{"scenario": "a", "verdict": "fine"}]}`, `verdict "fine" is not one of`},
		{`[1, 2]`, "not a suite summary"},
	} {
		dir := t.TempDir()
		if c.text != "" {
			if err := os.WriteFile(filepath.Join(dir, SuiteSummaryFile), []byte(c.text), 0o644); err != nil {
				t.Fatal(err)
			}
		}
		_, err := ReadSuiteSummary(dir)
		if !errors.Is(err, rig.ErrConfig) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%q: error %v, want one containing %q", c.text, err, c.want)
		}
	}
}

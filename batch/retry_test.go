package batch

import (
	"bytes"
	"context"
	"errors"
	"path/filepath"
	"strings"
	"sync"
	"testing"

	"gaitrig/record"
	"gaitrig/report"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// scripted is a Runner that answers each scenario's attempts from a
// script of outcomes ("" means: make the real run with rig.Run) and counts
// the calls, so a test sees exactly which runs were made again.
type scripted struct {
	mu     sync.Mutex
	script map[string][]record.Outcome
	calls  map[string]int
	dirs   map[string][]string
}

func (s *scripted) run(ctx context.Context, sc *scenarios.Scenario, o rig.Options) (rig.Result, error) {
	s.mu.Lock()
	n := s.calls[sc.Name]
	s.calls[sc.Name]++
	s.dirs[sc.Name] = append(s.dirs[sc.Name], o.RunDir)
	var out record.Outcome
	if steps := s.script[sc.Name]; n < len(steps) {
		out = steps[n]
	}
	s.mu.Unlock()
	if out == "" {
		return rig.Run(ctx, sc, o)
	}
	res := rig.Result{Dir: o.RunDir}
	res.Summary.Outcome = out
	if out == record.Invalid {
		res.Summary.Reason = "host_stall: the loop was stalled past the watchdog"
	}
	return res, nil
}

// TestHostTroubleIsRetriedNotBlamed: a run the host spoiled once is made
// again and judged on the good attempt; one spoiled on every attempt is
// infrastructure (a JUnit error, not a failure, and not counted as failed);
// a firmware failure is not retried; a quarantined failure is reported but
// does not fail the suite.
func TestHostTroubleIsRetriedNotBlamed(t *testing.T) {
	dir := t.TempDir()
	r := &scripted{calls: map[string]int{}, dirs: map[string][]string{}, script: map[string][]record.Outcome{
		"level-demo":         {record.Invalid, ""},                                 // spoiled once, then the real run
		"slope-change":       {record.Invalid, record.Invalid, record.Invalid},     // spoiled every time
		"push-recovery":      {record.Fail},                                        // the firmware's fault
		"low-friction-patch": {record.Tripped},                                     // quarantined
		"passive-downhill":   {record.Invalid, record.Invalid, record.Invalid, ""}, // would pass on a 4th attempt
	}}
	var scs []*scenarios.Scenario
	for _, n := range []string{"level-demo", "slope-change", "push-recovery", "low-friction-patch", "passive-downhill"} {
		scs = append(scs, builtin(t, n))
	}
	res := Suite{Dir: dir, Jobs: 2, Runner: r.run, Retries: 2, Quarantine: map[string]bool{"low-friction-patch": true}}.Run(context.Background(), scs)

	wantCalls := map[string]int{"level-demo": 2, "slope-change": 3, "push-recovery": 1, "low-friction-patch": 1, "passive-downhill": 3}
	for n, w := range wantCalls {
		if r.calls[n] != w {
			t.Errorf("%s: %d attempts, want %d", n, r.calls[n], w)
		}
	}
	if got, want := r.dirs["level-demo"], []string{filepath.Join(dir, "level-demo"), filepath.Join(dir, "level-demo.retry-1")}; strings.Join(got, ",") != strings.Join(want, ",") {
		t.Errorf("level-demo run folders %q, want %q (every attempt its own)", got, want)
	}
	verdicts := map[string]ScenarioVerdict{}
	for _, v := range res.Verdicts {
		verdicts[v.Scenario] = v
	}
	for n, want := range map[string]string{"level-demo": VerdictOK, "slope-change": VerdictInfrastructure, "push-recovery": VerdictRegressed,
		"low-friction-patch": VerdictRegressed, "passive-downhill": VerdictInfrastructure} {
		if v := verdicts[n]; v.Verdict != want || v.Attempts != wantCalls[n] {
			t.Errorf("%s: verdict %s after %d attempts, want %s after %d", n, v.Verdict, v.Attempts, want, wantCalls[n])
		}
	}
	if v := verdicts["level-demo"]; v.Outcome != "pass" || v.Figures == nil || v.Figures.Steps == 0 || v.RunFolder != filepath.Join(dir, "level-demo.retry-1") {
		t.Errorf("level-demo judged on %+v, want the real second attempt", v)
	}
	if _, err := record.Open(filepath.Join(dir, "level-demo.retry-1")); err != nil {
		t.Errorf("the retry's run folder: %v", err)
	}
	if res.Failed != 1 || res.Infrastructure != 2 || res.Quarantined != 1 {
		t.Errorf("failed %d, infrastructure %d, quarantined %d; want 1, 2, 1", res.Failed, res.Infrastructure, res.Quarantined)
	}
	if _, ok := res.Entries["slope-change"]; ok {
		t.Error("a run the host spoiled went into the new baseline's entries")
	}

	// The JUnit file: infrastructure as <error>, the regression as
	// <failure>, the quarantined scenario as <skipped>.
	sum, err := SummaryOf(res, AllShards, len(scs), "", nil)
	if err != nil {
		t.Fatal(err)
	}
	js := sum.JUnit("gaitrig suite")
	cases := map[string]report.Case{}
	for _, c := range js.Cases {
		cases[c.Name] = c
	}
	if c := cases["slope-change"]; c.Error == "" || c.Failure != "" || !strings.Contains(c.Error, "infrastructure, not the firmware") || !strings.Contains(c.Error, "host_stall") {
		t.Errorf("slope-change JUnit case %+v, want an infrastructure error", c)
	}
	if c := cases["push-recovery"]; c.Failure == "" || c.Error != "" {
		t.Errorf("push-recovery JUnit case %+v, want a failure", c)
	}
	if c := cases["low-friction-patch"]; c.Skipped == "" || c.Failure != "" || !strings.Contains(c.Skipped, "quarantined") || !strings.Contains(c.Skipped, "tripped") {
		t.Errorf("low-friction-patch JUnit case %+v, want skipped as quarantined with the outcome", c)
	}
	var buf bytes.Buffer
	if err := report.WriteJUnit(&buf, js); err != nil {
		t.Fatal(err)
	}
	x := buf.String()
	if !strings.Contains(x, `failures="1"`) || !strings.Contains(x, `errors="2"`) || !strings.Contains(x, `skipped="1"`) {
		t.Errorf("JUnit counts wrong:\n%s", x)
	}
}

// TestALinkThatNeverOpensIsInfrastructure makes the real runs against a
// serial port that does not exist: rig reports the link could not be
// opened (rig.ErrLinkOpen), the suite tries 1 + Retries times and reports
// infrastructure, not a failed build.
func TestALinkThatNeverOpensIsInfrastructure(t *testing.T) {
	dir := t.TempDir()
	port := filepath.Join(dir, "no-such-port")
	r := &scripted{calls: map[string]int{}, dirs: map[string][]string{}}
	res := Suite{Dir: dir, Link: "serial:" + port, Runner: r.run, Retries: 3}.Run(context.Background(), []*scenarios.Scenario{builtin(t, "level-demo")})
	if r.calls["level-demo"] != 4 {
		t.Errorf("%d attempts, want 4", r.calls["level-demo"])
	}
	if len(res.Runs) != 1 || !errors.Is(res.Runs[0].Err, rig.ErrLinkOpen) || !errors.Is(res.Runs[0].Err, rig.ErrConfig) {
		t.Fatalf("run error %v, want a link that could not be opened (still a configuration error)", res.Runs[0].Err)
	}
	if res.Failed != 0 || res.Infrastructure != 1 || res.Verdicts[0].Verdict != VerdictInfrastructure || !strings.Contains(res.Verdicts[0].Error, port) {
		t.Errorf("failed %d, infrastructure %d, verdict %+v", res.Failed, res.Infrastructure, res.Verdicts[0])
	}
	// A scenario that does not build is the user's error, not the host's:
	// not retried, and it fails the suite.
	bad := builtin(t, "level-demo")
	bad.Name = "no-such-gait"
	bad.Controller.Settings = map[string]float64{"no_such_gain": 1}
	r2 := &scripted{calls: map[string]int{}, dirs: map[string][]string{}}
	res = Suite{Dir: dir, Runner: r2.run, Retries: 3}.Run(context.Background(), []*scenarios.Scenario{bad})
	if r2.calls["no-such-gait"] != 1 || res.Failed != 1 || res.Infrastructure != 0 {
		t.Errorf("a configuration error: %d attempts, failed %d, infrastructure %d; want 1, 1, 0 (%v)", r2.calls["no-such-gait"], res.Failed, res.Infrastructure, res.Runs[0].Err)
	}
	seen := map[string]bool{}
	for _, d := range r.dirs["level-demo"] {
		seen[d] = true
	}
	if len(seen) != 4 {
		t.Errorf("attempts went to run folders %q, want four different ones", r.dirs["level-demo"])
	}
}

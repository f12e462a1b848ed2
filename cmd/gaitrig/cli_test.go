package main

import (
	"encoding/json"
	"io"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"gaitrig/record"
	"gaitrig/rig"
)

func TestFlagsAndArgumentsInAnyOrder(t *testing.T) {
	tests := []struct {
		args []string
		out  string
		pos  []string
	}{
		{[]string{"--out", "x", "a"}, "x", []string{"a"}},
		{[]string{"a", "--out", "x"}, "x", []string{"a"}},
		{[]string{"a", "--out", "x", "b"}, "x", []string{"a", "b"}},
		{[]string{"--", "--out"}, "", []string{"--out"}},
	}
	for _, tt := range tests {
		c := newCmdline("t", "", "", io.Discard, io.Discard)
		out := c.String("out", "", "")
		if done, _ := c.parse(tt.args); done {
			t.Fatalf("%v: parse stopped", tt.args)
		}
		if *out != tt.out || strings.Join(c.Args(), ",") != strings.Join(tt.pos, ",") {
			t.Errorf("%v: out=%q args=%v, want out=%q args=%v", tt.args, *out, c.Args(), tt.out, tt.pos)
		}
	}
}

// singleDashFlag finds a flag written with one dash at the start of a help
// line ("  -link"), the spelling the documentation does not use.
var singleDashFlag = regexp.MustCompile(`(?m)^\s+-[a-z]`)

// TestEveryCommandAnswersAlike holds every command in the table to the
// shared behaviour of cmdline: help on stdout with exit 0 and flags spelled
// --name; an unknown flag or a stray argument gives exit 2 with the error
// as the first line of stderr, a pointer to --help, and not the whole help.
// A command written against the old newFlagSet fails here.
func TestEveryCommandAnswersAlike(t *testing.T) {
	for _, name := range sortedKeys(commands) {
		code, out, errOut := run(t, name, "--help")
		if code != exitPass || errOut != "" || !strings.HasPrefix(out, "Usage: gaitrig "+name) {
			t.Errorf("gaitrig %s --help: exit %d, stdout %.60q, stderr %.60q; want exit 0, the help on stdout only", name, code, out, errOut)
		}
		if m := singleDashFlag.FindString(out); m != "" {
			t.Errorf("gaitrig %s --help spells a flag with one dash: %q", name, m)
		}
		code, out, errOut = run(t, name, "--no-such-flag")
		lines := strings.Split(strings.TrimSpace(errOut), "\n")
		if code != exitConfig || out != "" || len(lines) != 2 ||
			lines[0] != "gaitrig "+name+": flag provided but not defined: --no-such-flag" ||
			!strings.Contains(lines[1], "gaitrig "+name+" --help") {
			t.Errorf("gaitrig %s --no-such-flag: exit %d, stdout %q, stderr %q; want exit 2, the error then a pointer to --help", name, code, out, errOut)
		}
	}
	for _, args := range [][]string{{"no-such-command"}, {}} {
		if code, out, errOut := run(t, args...); code != exitConfig || out != "" || !strings.HasPrefix(errOut, "gaitrig") {
			t.Errorf("gaitrig %v: exit %d, stdout %q; want exit 2 and the message on stderr", args, code, out)
		}
	}
	if code, out, _ := run(t, "--help"); code != exitPass || !strings.Contains(out, "Commands:") {
		t.Errorf("gaitrig --help: exit %d, want 0 and the command list on stdout", code)
	}
	if code, out, _ := run(t, "help", "cycle"); code != exitPass || !strings.HasPrefix(out, "Usage: gaitrig cycle") {
		t.Errorf("gaitrig help cycle: exit %d, want 0 and the help of cycle", code)
	}
}

// TestEveryJSONCommandIsDocumented: a command with --json has its result
// type in jsonResults (so docs/cli.md shows the schema), and every type
// there belongs to a command with --json.
func TestEveryJSONCommandIsDocumented(t *testing.T) {
	for _, name := range sortedKeys(commands) {
		_, out, _ := run(t, name, "--help")
		has := strings.Contains(out, "\n  --json\n")
		if _, ok := jsonResults[name]; ok != has {
			t.Errorf("gaitrig %s: --json in the help %v, result type in jsonResults %v", name, has, ok)
		}
	}
	for _, name := range []string{"run", "check", "scenarios", "cycle", "suite", "preflight", "replay", "latency"} {
		if _, ok := jsonResults[name]; !ok {
			t.Errorf("gaitrig %s has no --json (issue 9 asks for it on every command that prints results)", name)
		}
	}
}

func TestWrongUsageGivesExitTwoAndTheRightMessage(t *testing.T) {
	dir := t.TempDir()
	full := filepath.Join(dir, "full")
	if err := os.MkdirAll(filepath.Join(full, "x"), 0o755); err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		args []string
		want string // in the first line of stderr
	}{
		{[]string{"latency", "--links", "builtin"}, `--links: unknown link "builtin"`},
		{[]string{"firmware", "--link", "builtin"}, "the firmware cannot be served over this link"},
		{[]string{"firmware"}, "--link is required"},
		{[]string{"run", "--dir", full, "level-demo"}, "already exists and is not empty"},
		{[]string{"run", "level-demo", "extra"}, "want exactly one SCENARIO"},
		{[]string{"run", "--link", "nonsense:x", "level-demo"}, "nonsense"},
		{[]string{"cycle", "--segment", "9", "slope-change"}, "--segment 9: the terrain has 4 segments"},
		{[]string{"suite", "--shard", "3/2", "builtin"}, "--shard"},
	}
	for _, tt := range tests {
		code, _, errOut := run(t, tt.args...)
		first, _, _ := strings.Cut(errOut, "\n")
		if code != exitConfig || !strings.Contains(first, tt.want) {
			t.Errorf("gaitrig %v: exit %d, first line %q; want exit 2 and %q", tt.args, code, first, tt.want)
		}
	}
	// The help of preflight's --link says what preflight does with it, not
	// what a run without --link does.
	_, out, _ := run(t, "preflight", "--help")
	if strings.Contains(out, "Empty: what the scenario says") {
		t.Errorf("preflight --help describes an empty --link it never has:\n%s", out)
	}
	_, out, _ = run(t, "firmware", "--help")
	if strings.Contains(out, "--pty") {
		t.Errorf("firmware --help mentions a --pty flag it does not have")
	}
}

func TestMaxStepsBelowMinStepsWarnsBeforeTheRun(t *testing.T) {
	out := t.TempDir()
	code, stdout, errOut := run(t, "run", "--quiet", "--no-report", "--out", out, "--max-steps", "3", "level-demo")
	if !strings.Contains(errOut, "warning: --max-steps 3 is below the scenario's pass.min_steps 30") {
		t.Errorf("no warning about --max-steps below min_steps:\n%s", errOut)
	}
	if code != exitFail {
		t.Errorf("exit %d, want 1 (the run cannot reach min_steps)", code)
	}
	if !strings.Contains(stdout, "link: builtin") {
		t.Errorf("the run does not say which link it used:\n%s", stdout)
	}
	if n := strings.Count(stdout+errOut, "link: "); n != 1 {
		t.Errorf("the link is named %d times on stdout and stderr together, want once:\n%s%s", n, stdout, errOut)
	}
	// Over another link the run names that link, and the scenario's
	// description no longer claims a controller.
	_, stdout, errOut = run(t, "run", "--quiet", "--no-report", "--out", out, "--link", "pty", "--max-steps", "2", "level-demo")
	if !strings.Contains(stdout, "\nlink: pty") || strings.Contains(stdout, "built-in reference controller") {
		t.Errorf("a run over a pty does not say so:\n%s%s", stdout, errOut)
	}
}

// decodeJSON decodes a command's stdout strictly into v: one document,
// nothing after it, every field known.
func decodeJSON(t *testing.T, what, out string, v any) {
	t.Helper()
	dec := json.NewDecoder(strings.NewReader(out))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		t.Fatalf("%s --json: %v\n%s", what, err, out)
	}
	if dec.More() {
		t.Fatalf("%s --json: more than one document on stdout", what)
	}
	if strings.Contains(out, `\u003c`) || strings.Contains(out, `\u003e`) || strings.Contains(out, `\u0026`) {
		t.Errorf("%s --json escapes HTML characters", what)
	}
}

func TestJSONOfRunCheckScenariosCycleReplay(t *testing.T) {
	out := t.TempDir()
	code, stdout, _ := run(t, "run", "--json", "--out", out, "--max-steps", "4", "level-demo")
	var r runResult
	decodeJSON(t, "run", stdout, &r)
	if code != exitFail || r.Scenario != "level-demo" || !strings.HasPrefix(r.Link, "builtin") || r.Summary == nil || r.Summary.Steps != 4 {
		t.Errorf("run --json: exit %d, %+v", code, r)
	}
	if r.Summary != nil {
		onDisk := readSummary(t, r.RunFolder)
		if onDisk.Steps != r.Summary.Steps || onDisk.Outcome != r.Summary.Outcome || onDisk.PeakFrictionUtilization != r.Summary.PeakFrictionUtilization {
			t.Errorf("run --json summary differs from summary.json: %+v vs %+v", r.Summary, onDisk)
		}
	}
	if r.Report == "" {
		t.Errorf("run --json names no report although one was written")
	}

	code, stdout, _ = run(t, "replay", "--json", r.RunFolder)
	var rp replayResult
	decodeJSON(t, "replay", stdout, &rp)
	if code != exitPass || !rp.Match || rp.Ticks == 0 || rp.FirstDivergence != -1 {
		t.Errorf("replay --json: exit %d, %+v", code, rp)
	}

	code, stdout, _ = run(t, "check", "--json", "level-demo", "no-such-scenario")
	var cr []checkResult
	decodeJSON(t, "check", stdout, &cr)
	if code != exitConfig || len(cr) != 2 || !cr[0].OK || cr[1].OK || len(cr[1].Problems) == 0 {
		t.Errorf("check --json: exit %d, %+v", code, cr)
	}

	code, stdout, _ = run(t, "scenarios", "--json")
	var se []scenarioEntry
	decodeJSON(t, "scenarios", stdout, &se)
	if code != exitPass || len(se) < 6 {
		t.Errorf("scenarios --json: exit %d, %d entries", code, len(se))
	}
	for _, e := range se {
		if e.Description == "" || len(e.Description) > 150 {
			t.Errorf("scenario %s: description of %d characters; keep it short (≤ 150) and present", e.Name, len(e.Description))
		}
		if strings.Contains(e.Description, "built-in reference controller") {
			t.Errorf("scenario %s: the description names a controller; the run prints the link it used", e.Name)
		}
	}

	code, stdout, _ = run(t, "cycle", "--json", "passive-downhill")
	var g rig.GaitReport
	decodeJSON(t, "cycle", stdout, &g)
	if code != exitPass || !g.Found || g.Segment.Of != 1 || g.Segment.Index != 0 || g.Segment.SlopeRad != -0.02 {
		t.Errorf("cycle --json: exit %d, found %v, segment %+v", code, g.Found, g.Segment)
	}
}

// TestCycleSaysAndTakesTheSegment: on a terrain of several segments cycle
// names the one it analysed, and --segment picks another, whose slope and
// friction the report carries and whose gait differs.
func TestCycleSaysAndTakesTheSegment(t *testing.T) {
	code, out, errOut := run(t, "cycle", "slope-change")
	if code != exitPass || !strings.Contains(out, "on terrain segment 0 (of 4, counted from 0; the segment under the initial stance foot): slope 0 rad") {
		t.Fatalf("cycle slope-change: exit %d\n%s%s", code, out, errOut)
	}
	var level, down rig.GaitReport
	_, out, _ = run(t, "cycle", "--json", "slope-change")
	decodeJSON(t, "cycle", out, &level)
	code, out, errOut = run(t, "cycle", "--json", "--segment", "1", "slope-change")
	decodeJSON(t, "cycle --segment 1", out, &down)
	if code != exitPass || !down.Segment.Chosen || down.Segment.Index != 1 || down.Segment.SlopeRad != -0.03 || down.Segment.MuStatic != 0.8 {
		t.Fatalf("cycle --segment 1: exit %d, segment %+v\n%s", code, down.Segment, errOut)
	}
	// Downhill the walker gains energy each step that the level walker has
	// not: the gaits must differ (a finder that ignored --segment would
	// give the same period and speed).
	if down.PeriodS == level.PeriodS && down.SpeedMPS == level.SpeedMPS {
		t.Errorf("--segment 1 gave the same gait as segment 0: %v s, %v m/s", down.PeriodS, down.SpeedMPS)
	}
}

func TestJSONOfSuiteAndPreflight(t *testing.T) {
	if testing.Short() {
		t.Skip("runs a suite and a preflight battery")
	}
	dir := t.TempDir()
	// A scenario with a name longer than the table's old fixed column.
	long := filepath.Join(dir, "lib")
	if err := os.MkdirAll(long, 0o755); err != nil {
		t.Fatal(err)
	}
	sc, err := resolveScenario("passive-downhill")
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Replace(string(sc.Text), "name: passive-downhill", "name: passive-downhill-with-a-rather-long-name", 1)
	if err := os.WriteFile(filepath.Join(long, "a.yaml"), []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	code, stdout, errOut := run(t, "suite", "--json", "--no-report", "--out", filepath.Join(dir, "runs"), long)
	var s suiteResult
	decodeJSON(t, "suite", stdout, &s)
	if code != exitPass || len(s.Scenarios) != 1 || s.Scenarios[0].Verdict != "ok" || s.Caution != record.Caution {
		t.Fatalf("suite --json: exit %d, %+v\n%s", code, s, errOut)
	}
	if _, err := os.Stat(s.JUnit); err != nil {
		t.Errorf("suite --json names a JUnit file that is not there: %v", err)
	}
	// The progress went to stderr, its columns aligned for the long name.
	if !strings.Contains(errOut, "  passive-downhill-with-a-rather-long-name  pass ") {
		t.Errorf("suite progress line not aligned:\n%s", errOut)
	}

	code, stdout, errOut = run(t, "preflight", "--json", "--scenario", "passive-downhill", "--out", filepath.Join(dir, "pf"))
	var p preflightResult
	decodeJSON(t, "preflight", stdout, &p)
	if len(p.Checks) == 0 || p.Go != (code == exitPass) || p.Link != "builtin" {
		t.Fatalf("preflight --json: exit %d, %+v\n%s", code, p, errOut)
	}
	for _, c := range p.Checks {
		if c.Error != "" {
			continue
		}
		// The headroom against an independent reading: the check's own
		// summary.json in its run folder.
		onDisk := readSummary(t, c.RunFolder)
		if c.PeakFrictionUtilization != onDisk.PeakFrictionUtilization || c.FrictionHeadroom != 1-onDisk.PeakFrictionUtilization {
			t.Errorf("check %s: utilization %v headroom %v, summary.json says utilization %v", c.Name, c.PeakFrictionUtilization, c.FrictionHeadroom, onDisk.PeakFrictionUtilization)
		}
	}
}

func TestPreflightTableNamesTheHeadroomAndStaysAligned(t *testing.T) {
	if testing.Short() {
		t.Skip("runs a preflight battery")
	}
	_, out, _ := run(t, "preflight", "--scenario", "passive-downhill", "--out", t.TempDir())
	var header string
	var rows []string
	for _, l := range strings.Split(out, "\n") {
		switch {
		case strings.HasPrefix(l, "check "):
			header = l
		case header != "" && l != "" && !strings.HasPrefix(l, " ") && !strings.HasPrefix(l, "verdict"):
			rows = append(rows, l)
		}
		if strings.HasPrefix(l, "verdict") {
			break
		}
	}
	if !strings.Contains(header, "friction headroom") || strings.Contains(header, " margin ") {
		t.Fatalf("preflight header %q: want a friction headroom column and no margin column", header)
	}
	col := strings.Index(header, "outcome")
	for _, r := range rows[:min(len(rows), 7)] {
		if len(r) <= col || r[col-1] != ' ' || r[col] == ' ' {
			t.Errorf("row not aligned with the header's outcome column %d:\n%s\n%s", col, header, r)
		}
	}
}

func TestDeprecatedSpellingsStillWork(t *testing.T) {
	out := t.TempDir()
	code, _, errOut := run(t, "run", "--quiet", "--report=false", "--out", out, "--max-steps", "2", "--duration", "5", "passive-downhill")
	if code == exitConfig || !strings.Contains(errOut, "--report is deprecated") {
		t.Errorf("run --report=false: exit %d\n%s", code, errOut)
	}
	dir := onlyRunDir(t, out)
	if _, err := os.Stat(filepath.Join(dir, "report.html")); err == nil {
		t.Errorf("run --report=false wrote a report")
	}

	// --junit means "write junit.xml" in report as in run: not without it
	// (unless the folder has one to bring up to date), yes with it.
	if code, _, errOut := run(t, "report", dir); code != exitPass {
		t.Fatalf("report: exit %d\n%s", code, errOut)
	}
	if _, err := os.Stat(filepath.Join(dir, "junit.xml")); err == nil {
		t.Errorf("report without --junit wrote junit.xml into a folder that had none")
	}
	if code, _, errOut := run(t, "report", "--junit", dir); code != exitPass {
		t.Fatalf("report --junit: exit %d\n%s", code, errOut)
	}
	if _, err := os.Stat(filepath.Join(dir, "junit.xml")); err != nil {
		t.Errorf("report --junit wrote no junit.xml: %v", err)
	}

	// The suite's old spellings: --junit PATH and --parallel N.
	lib := t.TempDir()
	sc, err := resolveScenario("passive-downhill")
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(lib, "a.yaml"), sc.Text, 0o644); err != nil {
		t.Fatal(err)
	}
	junit := filepath.Join(t.TempDir(), "nightly.xml")
	code, _, errOut = run(t, "suite", "--no-report", "--junit", junit, "--parallel", "1", "--out", t.TempDir(), lib)
	if code != exitPass || !strings.Contains(errOut, "--junit is deprecated") || !strings.Contains(errOut, "--parallel is deprecated") {
		t.Errorf("suite --junit PATH --parallel 1: exit %d\n%s", code, errOut)
	}
	if _, err := os.Stat(junit); err != nil {
		t.Errorf("suite --junit PATH wrote no file there: %v", err)
	}
}

// TestOneActuatorIsNotPlural: a compass walker under the built-in
// controller has one actuator, and the run's log says so without "1
// actuators".
func TestOneActuatorIsNotPlural(t *testing.T) {
	sc, err := resolveScenario("passive-downhill")
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Replace(string(sc.Text), "link: none", "link: builtin", 1)
	if text == string(sc.Text) {
		t.Fatal("passive-downhill has no controller.link none to replace")
	}
	file := filepath.Join(t.TempDir(), "compass.yaml")
	if err := os.WriteFile(file, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	_, _, errOut := run(t, "run", "--quiet", "--no-report", "--max-steps", "1", "--out", t.TempDir(), file)
	if !strings.Contains(errOut, "actuators: 1") || strings.Contains(errOut, "1 actuators") {
		t.Errorf("the handshake line does not say one actuator plainly:\n%s", errOut)
	}
}

// TestJSONOfDemoAndLatency decodes the two remaining result commands: a
// short demo over the embedded broker (a three-step variant of
// passive-downhill) and a latency measurement of the in-process link over
// 200 ticks. Neither asserts a timing: the latency figures are only
// required to be there, and consistent (p50 ≤ p99 ≤ max).
func TestJSONOfDemoAndLatency(t *testing.T) {
	sc, err := resolveScenario("passive-downhill")
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Replace(string(sc.Text), "max_steps: 30", "max_steps: 3", 1)
	text = strings.Replace(text, "min_steps: 20", "min_steps: 3", 1)
	file := filepath.Join(t.TempDir(), "short.yaml")
	if err := os.WriteFile(file, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	code, stdout, errOut := run(t, "demo", "--json", "--scenario", file, "--out", t.TempDir())
	var r runResult
	decodeJSON(t, "demo", stdout, &r)
	if code != exitPass || !strings.HasPrefix(r.Link, "mqtt:") || r.Summary == nil || r.Summary.Steps != 3 {
		t.Errorf("demo --json: exit %d, %+v\n%s", code, r, errOut)
	}
	if !strings.Contains(errOut, "step   1") {
		t.Errorf("demo --json: the step lines did not go to stderr:\n%s", errOut)
	}

	code, stdout, errOut = run(t, "latency", "--json", "--links", "inproc", "--ticks", "200", "--rt-priority", "-1")
	var l latencyResult
	decodeJSON(t, "latency", stdout, &l)
	if code != exitPass || len(l.Links) != 1 || l.Links[0].Link != "inproc" || l.Links[0].Ticks == 0 {
		t.Fatalf("latency --json: exit %d, %+v\n%s", code, l, errOut)
	}
	if rt := l.Links[0].RoundTripUS; rt == nil || !(rt.P50 <= rt.P99 && rt.P99 <= rt.Max) || rt.Count == 0 {
		t.Errorf("latency --json: round trip %+v, want measured figures with p50 ≤ p99 ≤ max", rt)
	}
}

// TestCycleCarriesTheCaution: cycle calls a gait stable, a verdict a
// person acts on, so its text ends with the safety caution as every
// command that reports a result does.
func TestCycleCarriesTheCaution(t *testing.T) {
	code, out, errOut := run(t, "cycle", "passive-downhill")
	if code != exitPass || !strings.Contains(out, "stable") || !strings.Contains(out, safetyCaution) {
		t.Fatalf("cycle passive-downhill: exit %d, want a verdict and the caution\n%s%s", code, out, errOut)
	}
}

package main

import (
	"bufio"
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"gaitrig/batch"
	"gaitrig/record"
)

// run calls the command line in-process and returns its exit code and output.
func run(t *testing.T, args ...string) (int, string, string) {
	t.Helper()
	var out, errb bytes.Buffer
	code := dispatch(args, &out, &errb)
	return code, out.String(), errb.String()
}

// onlyRunDir returns the single run folder below root.
func onlyRunDir(t *testing.T, root string) string {
	t.Helper()
	entries, err := os.ReadDir(root)
	if err != nil || len(entries) != 1 {
		t.Fatalf("want exactly one run folder in %s, got %v (%v)", root, entries, err)
	}
	return filepath.Join(root, entries[0].Name())
}

func readSummary(t *testing.T, dir string) record.Summary {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(dir, "summary.json"))
	if err != nil {
		t.Fatal(err)
	}
	var s record.Summary
	if err := json.Unmarshal(b, &s); err != nil {
		t.Fatalf("summary.json: %v", err)
	}
	return s
}

func TestDemoWalksOverTheEmbeddedBroker(t *testing.T) {
	root := t.TempDir()
	code, out, errOut := run(t, "demo", "--out", root)
	if code != exitPass {
		t.Fatalf("gaitrig demo: exit %d\nstdout:\n%s\nstderr:\n%s", code, out, errOut)
	}
	dir := onlyRunDir(t, root)
	s := readSummary(t, dir)
	if s.Outcome != record.Pass || s.Steps < 20 {
		t.Errorf("demo outcome %s with %d steps, want pass with ≥ 20", s.Outcome, s.Steps)
	}
	for _, f := range []string{"manifest.json", "telemetry.csv", "events.jsonl", "steps.csv", "report.html", "junit.xml"} {
		if _, err := os.Stat(filepath.Join(dir, f)); err != nil {
			t.Errorf("demo run folder lacks %s", f)
		}
	}
	for _, want := range []string{"step   1", "link: mqtt:", "outcome: PASS", "report:", "not a safety certificate"} {
		if !strings.Contains(out, want) {
			t.Errorf("demo output lacks %q:\n%s", want, out)
		}
	}
	if n := strings.Count(out+errOut, "link: "); n != 1 {
		t.Errorf("the demo names its link %d times on stdout and stderr together, want once:\n%s%s", n, out, errOut)
	}
	if !strings.Contains(errOut, "mqtt") && !strings.Contains(out, "mqtt") {
		// The link name is in the manifest either way; the log line says it too.
		m, _ := os.ReadFile(filepath.Join(dir, "manifest.json"))
		if !bytes.Contains(m, []byte("mqtt:embedded")) {
			t.Errorf("the demo did not run over the embedded broker (manifest link missing)")
		}
	}
}

func TestCheckPointsToFileLineAndField(t *testing.T) {
	dir := t.TempDir()
	bad := filepath.Join(dir, "bad.yaml")
	text, err := os.ReadFile("../../scenarios/library/level-demo.yaml")
	if err != nil {
		t.Fatal(err)
	}
	broken := strings.Replace(string(text), "foot_radius_m: 0.27", "foot_radius_m: 1.5", 1)
	if broken == string(text) {
		t.Fatal("the demo scenario no longer has the line this test edits")
	}
	if err := os.WriteFile(bad, []byte(broken), 0o644); err != nil {
		t.Fatal(err)
	}
	code, _, errOut := run(t, "check", bad)
	if code != exitConfig {
		t.Errorf("check of a broken file: exit %d, want %d", code, exitConfig)
	}
	line := 1 + strings.Count(broken[:strings.Index(broken, "foot_radius_m: 1.5")], "\n")
	want := bad + ":" + itoaN(line) + ":"
	if !strings.Contains(errOut, want) || !strings.Contains(errOut, "foot_radius") {
		t.Errorf("check output does not point to %s and the field:\n%s", want, errOut)
	}
	if code, out, _ := run(t, "check", "level-demo", "passive-downhill"); code != exitPass || strings.Count(out, ": ok") != 2 {
		t.Errorf("check of built-in scenarios: exit %d\n%s", code, out)
	}
}

func itoaN(n int) string { return strconv.Itoa(n) }

func TestCycleFindsThePassiveGait(t *testing.T) {
	code, out, errOut := run(t, "cycle", "--json", "passive-downhill")
	if code != exitPass {
		t.Fatalf("cycle: exit %d\n%s\n%s", code, out, errOut)
	}
	var r map[string]any
	if err := json.Unmarshal([]byte(out), &r); err != nil {
		t.Fatalf("cycle --json is not JSON: %v\n%s", err, out)
	}
	for _, k := range []string{"found", "stable", "eigenvalues", "period_s", "step_length_m", "speed_mps",
		"energy_lost_per_step_j", "peak_required_friction", "min_normal_force_n", "impulse_ratio", "state_after_heel_strike"} {
		if _, ok := r[k]; !ok {
			t.Errorf("cycle --json lacks %q", k)
		}
	}
	if r["found"] != true {
		t.Errorf("passive downhill gait not found: %s", out)
	}
	if p, _ := r["period_s"].(float64); p <= 0 {
		t.Errorf("period_s = %v, want > 0", r["period_s"])
	}
}

func TestReplayMatchesARecordedRun(t *testing.T) {
	root := t.TempDir()
	dir := filepath.Join(root, "run")
	if code, out, errOut := run(t, "run", "--quiet", "--report=false", "--dir", dir, "level-demo"); code != exitPass {
		t.Fatalf("run: exit %d\n%s\n%s", code, out, errOut)
	}
	code, out, errOut := run(t, "replay", dir)
	if code != exitPass {
		t.Errorf("replay of an untouched run: exit %d\n%s\n%s", code, out, errOut)
	}
}

func TestSuiteComparesWithBaseline(t *testing.T) {
	root := t.TempDir()
	lib := filepath.Join(root, "lib")
	if err := os.MkdirAll(lib, 0o755); err != nil {
		t.Fatal(err)
	}
	text, err := os.ReadFile("../../scenarios/library/slope-change.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(lib, "slope-change.yaml"), text, 0o644); err != nil {
		t.Fatal(err)
	}
	base := filepath.Join(root, "baseline.json")
	code, out, errOut := run(t, "suite", "--out", filepath.Join(root, "runs1"), "--no-report", "--write-baseline", base, lib)
	if code != exitPass {
		t.Fatalf("first suite run: exit %d\n%s\n%s", code, out, errOut)
	}
	// Same firmware, same scenario: no regression against its own baseline.
	code, out, errOut = run(t, "suite", "--out", filepath.Join(root, "runs2"), "--no-report", "--baseline", base, lib)
	if code != exitPass {
		t.Fatalf("suite against its own baseline: exit %d\n%s\n%s", code, out, errOut)
	}
	// A baseline that walked further makes this run a regression.
	bl, err := batch.ReadBaseline(base)
	if err != nil {
		t.Fatal(err)
	}
	e := bl.Scenarios["slope-change"]
	e.Steps += 10
	bl.Scenarios["slope-change"] = e
	if err := batch.WriteBaseline(base, bl.Tolerances, bl.Scenarios); err != nil {
		t.Fatal(err)
	}
	junit := filepath.Join(root, "junit.xml")
	code, out, _ = run(t, "suite", "--out", filepath.Join(root, "runs3"), "--no-report", "--baseline", base, "--junit", junit, lib)
	if code != exitFail || !strings.Contains(out, "REGRESSED") {
		t.Errorf("suite with a better baseline: exit %d, want %d and a REGRESSED line\n%s", code, exitFail, out)
	}
	x, err := os.ReadFile(junit)
	if err != nil || !bytes.Contains(x, []byte("<failure")) {
		t.Errorf("JUnit XML lacks the failure: %v\n%s", err, x)
	}
}

// TestInterruptEndsTheRunCleanly sends SIGINT to a real gaitrig process in
// the middle of a wall-clock run: the run must end with outcome aborted and
// a complete, readable run folder.
func TestInterruptEndsTheRunCleanly(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the command; skipped with -short")
	}
	bin := buildCommand(t)
	dir := filepath.Join(t.TempDir(), "run")
	cmd := exec.Command(bin, "run", "--quiet", "--clock", "wallclock", "--dir", dir, "level-demo")
	var out bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &out
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	// Wait until ticks are being recorded, then interrupt.
	if !waitForTelemetry(dir, 10000, 20*time.Second) {
		cmd.Process.Kill()
		cmd.Wait()
		t.Fatalf("no telemetry after 20 s:\n%s", out.String())
	}
	if err := cmd.Process.Signal(syscall.SIGINT); err != nil {
		t.Fatal(err)
	}
	done := make(chan error, 1)
	go func() { done <- cmd.Wait() }()
	select {
	case <-done:
	case <-time.After(20 * time.Second):
		cmd.Process.Kill()
		t.Fatalf("gaitrig did not end within 20 s of SIGINT:\n%s", out.String())
	}
	if code := cmd.ProcessState.ExitCode(); code != exitFail {
		t.Errorf("exit code after SIGINT %d, want %d\n%s", code, exitFail, out.String())
	}
	s := readSummary(t, dir)
	if s.Outcome != record.Aborted {
		t.Errorf("outcome %q after SIGINT, want aborted", s.Outcome)
	}
	r, err := record.Open(dir)
	if err != nil {
		t.Fatalf("run folder unreadable after SIGINT: %v", err)
	}
	n := 0
	it, err := r.Ticks()
	if err != nil {
		t.Fatal(err)
	}
	defer it.Close()
	for it.Next() {
		n++
	}
	if err := it.Err(); err != nil {
		t.Errorf("telemetry after SIGINT: %v", err)
	}
	if int64(n) != s.Ticks {
		t.Errorf("telemetry has %d rows, the summary counts %d ticks", n, s.Ticks)
	}
}

var (
	buildOnce sync.Once
	builtBin  string
	buildErr  error
)

// buildCommand builds the gaitrig binary once per test process.
func buildCommand(t *testing.T) string {
	t.Helper()
	buildOnce.Do(func() {
		dir, err := os.MkdirTemp("", "gaitrig-bin")
		if err != nil {
			buildErr = err
			return
		}
		builtBin = filepath.Join(dir, "gaitrig")
		out, err := exec.Command("go", "build", "-o", builtBin, ".").CombinedOutput()
		if err != nil {
			buildErr = fmt.Errorf("go build: %v\n%s", err, out)
		}
	})
	if buildErr != nil {
		t.Fatal(buildErr)
	}
	return builtBin
}

// TestFirmwareProcessUnpluggedMidRun: the reference firmware runs as its own
// process on a real pty pair, the rig opens the pty's port with the serial
// link, and the firmware process is killed in the middle of a wall-clock
// run, as a board whose USB cable is pulled. The rig must raise link_lost,
// e-stop through the watchdog, and leave a complete run folder.
func TestFirmwareProcessUnpluggedMidRun(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the command; skipped with -short")
	}
	bin := buildCommand(t)
	fw := exec.Command(bin, "firmware", "--link", "pty")
	stdout, err := fw.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := fw.Start(); err != nil {
		t.Fatal(err)
	}
	defer func() { fw.Process.Kill(); fw.Wait() }()
	// The firmware prints the port for the rig: "... --link serial:/dev/pts/N".
	portCh := make(chan string, 1)
	go func() {
		sc := bufio.NewScanner(stdout)
		for sc.Scan() {
			if _, after, ok := strings.Cut(sc.Text(), "--link "); ok {
				portCh <- strings.TrimSpace(after)
				break
			}
		}
		io.Copy(io.Discard, stdout)
	}()
	var link string
	select {
	case link = <-portCh:
	case <-time.After(20 * time.Second):
		t.Fatal("the firmware process did not print its port within 20 s")
	}

	dir := filepath.Join(t.TempDir(), "run")
	type result struct {
		code     int
		out, err string
	}
	done := make(chan result, 1)
	go func() {
		c, o, e := run(t, "run", "--quiet", "--report=false", "--clock", "wallclock", "--link", link, "--dir", dir, "level-demo")
		done <- result{c, o, e}
	}()
	if !waitForTelemetry(dir, 20000, 20*time.Second) {
		t.Fatal("no telemetry from the serial run within 20 s")
	}
	if err := fw.Process.Kill(); err != nil {
		t.Fatal(err)
	}
	var r result
	select {
	case r = <-done:
	case <-time.After(30 * time.Second):
		t.Fatal("the rig did not end the run within 30 s of the unplug")
	}
	if r.code != exitFail {
		t.Errorf("exit code %d after the unplug, want %d\n%s\n%s", r.code, exitFail, r.out, r.err)
	}
	s := readSummary(t, dir)
	if s.Outcome != record.Tripped {
		t.Errorf("outcome %s (%s), want tripped", s.Outcome, s.Reason)
	}
	if s.Alarms["link_lost"] == 0 && s.Alarms["watchdog"] == 0 {
		t.Errorf("alarms %v: want link_lost or watchdog after the unplug", s.Alarms)
	}
	rr, err := record.Open(dir)
	if err != nil {
		t.Fatalf("run folder unreadable after the unplug: %v", err)
	}
	if len(rr.Notes) > 0 {
		t.Errorf("run folder incomplete after the unplug: %v", rr.Notes)
	}
}

// waitForTelemetry waits until the run folder's telemetry holds at least
// size bytes (ticks are being recorded), or gives up after timeout.
func waitForTelemetry(dir string, size int64, timeout time.Duration) bool {
	for deadline := time.Now().Add(timeout); time.Now().Before(deadline); time.Sleep(20 * time.Millisecond) {
		if st, err := os.Stat(filepath.Join(dir, "telemetry.csv")); err == nil && st.Size() >= size {
			return true
		}
	}
	return false
}

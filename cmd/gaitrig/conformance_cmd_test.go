package main

import (
	"bytes"
	"encoding/json"
	"encoding/xml"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"gaitrig/conformance"
	"gaitrig/firmware/reference"
	"gaitrig/rig"
)

// gaitrig conformance against the built-in firmware: exit 0, a JSON report
// with every check, and a JUnit file that parses with one case per check.
// A link that does not parse exits 2.
func TestConformanceCommand(t *testing.T) {
	junit := filepath.Join(t.TempDir(), "conformance.xml")
	var out, errb bytes.Buffer
	code := dispatch([]string{"conformance", "--link", "builtin", "--samples", "50", "--json", "--junit-file", junit}, &out, &errb)
	if code != exitPass {
		t.Fatalf("exit %d, want %d\nstdout:\n%s\nstderr:\n%s", code, exitPass, out.String(), errb.String())
	}
	var rep struct {
		Caution string `json:"caution"`
		Passed  bool   `json:"passed"`
		Checks  []struct {
			Name, Status string
		} `json:"checks"`
		RoundTrip struct {
			Count int `json:"count"`
		} `json:"round_trip_us"`
	}
	if err := json.Unmarshal(out.Bytes(), &rep); err != nil {
		t.Fatalf("--json output does not parse: %v\n%s", err, out.String())
	}
	if !strings.Contains(rep.Caution, "not a safety certificate") {
		t.Errorf("the JSON report lacks the caution: %q", rep.Caution)
	}
	if !rep.Passed || len(rep.Checks) != 14 || rep.RoundTrip.Count != 50 { // 14: the battery with belt_place_taken
		t.Errorf("report: passed %v, %d checks, %d round trips; want true, 14, 50", rep.Passed, len(rep.Checks), rep.RoundTrip.Count)
	}
	raw, err := os.ReadFile(junit)
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Suites []struct {
			Tests int `xml:"tests,attr"`
		} `xml:"testsuite"`
	}
	if err := xml.Unmarshal(raw, &doc); err != nil || len(doc.Suites) != 1 || doc.Suites[0].Tests != 14 {
		t.Errorf("JUnit file: %v, %+v; want one suite of 14 cases", err, doc.Suites)
	}

	out.Reset()
	errb.Reset()
	if code := dispatch([]string{"conformance", "--link", "nonsense"}, &out, &errb); code != exitConfig || !strings.Contains(errb.String(), "unknown link") {
		t.Errorf("an unknown link: exit %d, stderr %q; want %d and a message naming it", code, errb.String(), exitConfig)
	}
}

// gaitrig latency --link serial:PATH measures a firmware someone else runs
// (here the reference firmware served on a pty, as `gaitrig firmware --link
// pty` does) with the plant frozen, and prints the wire time of the baud
// rate beside the measurement.
func TestLatencyOfASerialLink(t *testing.T) {
	paths := make(chan string, 1)
	done := make(chan error, 1)
	go func() {
		done <- rig.ServeFirmware("pty", "", "", "", reference.Options{}, func(line string) {
			if i := strings.Index(line, "serial:"); i >= 0 {
				paths <- strings.Fields(line[i+len("serial:"):])[0]
			}
		})
	}()
	var path string
	select {
	case path = <-paths:
	case err := <-done:
		t.Fatalf("the firmware ended before announcing its pty: %v", err)
	case <-time.After(10 * time.Second):
		t.Fatal("the firmware announced no pty within 10 s")
	}
	var out, errb bytes.Buffer
	code := dispatch([]string{"latency", "--link", "serial:" + path + "@921600", "--ticks", "100"}, &out, &errb)
	if code != exitPass {
		t.Fatalf("exit %d\nstdout:\n%s\nstderr:\n%s", code, out.String(), errb.String())
	}
	for _, want := range []string{"plant frozen", "gaitrig-reference", "wire time of a state and a command at 921600 baud: 1562µs"} {
		if !strings.Contains(out.String(), want) {
			t.Errorf("output lacks %q:\n%s", want, out.String())
		}
	}
	select {
	case err := <-done:
		if err != nil {
			t.Errorf("the firmware ended with %v, want a normal end after the rig's stop", err)
		}
	case <-time.After(15 * time.Second):
		t.Error("the firmware did not end within 15 s of the rig's stop")
	}
}

// The battery's exit code and closing line: a failure or a check not run
// fails, a host_stall with neither gives no verdict (exit 3, as a run the
// host spoiled), and only all required checks passed (or not applicable)
// pass; an optional check's failure does not count.
func TestConformanceVerdict(t *testing.T) {
	r := func(st conformance.Status, required bool) conformance.Result {
		return conformance.Result{Name: "x", Status: st, Required: required}
	}
	tests := []struct {
		name        string
		checks      []conformance.Result
		passed      bool
		interrupted bool
		code        int
		prefix      string
	}{
		{"all pass", []conformance.Result{r(conformance.Pass, true), r(conformance.Skipped, true)}, true, false, exitPass, "PASS"},
		{"optional fail", []conformance.Result{r(conformance.Pass, true), r(conformance.Fail, false)}, true, false, exitPass, "PASS"},
		{"a failure", []conformance.Result{r(conformance.Fail, true), r(conformance.HostStall, true)}, false, false, exitFail, "FAIL: 1 required checks failed, 0 could not run, 1 could not be judged"},
		{"not run", []conformance.Result{r(conformance.NotRun, true)}, false, false, exitFail, "FAIL: 0 required checks failed, 1 could not run"},
		{"host stall only", []conformance.Result{r(conformance.Pass, true), r(conformance.HostStall, true)}, false, false, exitInvalid, "NO VERDICT: 1 required checks"},
		{"interrupted", []conformance.Result{r(conformance.Pass, true)}, true, true, exitFail, "FAIL: 0 required checks failed, 0 could not run (interrupted)"},
	}
	for _, tc := range tests {
		rep := conformance.Report{Checks: tc.checks, Passed: tc.passed}
		code, v := conformanceVerdict(&rep, tc.interrupted)
		if code != tc.code || !strings.HasPrefix(v, tc.prefix) {
			t.Errorf("%s: exit %d %q, want %d and a line starting %q", tc.name, code, v, tc.code, tc.prefix)
		}
	}
}

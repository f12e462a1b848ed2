package report

import (
	"bytes"
	"encoding/xml"
	"errors"
	"strings"
	"testing"

	"gaitrig/record"
)

func TestWriteJUnitParsesBack(t *testing.T) {
	tests := []struct {
		name                          string
		suites                        []Suite
		wantTests, wantFail, wantSkip int
		wantErrors                    int
		wantInFailure                 []string
	}{
		{
			name:   "empty document",
			suites: nil,
		},
		{
			name: "single run, one case per criterion",
			suites: []Suite{{Name: "level-walk", Cases: []Case{
				{Name: "min_steps", Seconds: 12.5},
				{Name: "peak_friction_utilization", Failure: "value 0.93 above limit 0.8", Detail: "peak at t=3.2 s, right foot"},
				{Name: "latency_p99", Skipped: "lockstep run: no wall-clock latency"},
			}}},
			wantTests: 3, wantFail: 1, wantSkip: 1,
			wantInFailure: []string{"value 0.93 above limit 0.8"},
		},
		{
			name:      "a scenario that could not run is an error",
			suites:    []Suite{ScenarioSuite("library", []ScenarioResult{{Scenario: "broken", Err: errors.New("scenario file missing")}})},
			wantTests: 1, wantErrors: 1,
			wantInFailure: []string{"could not run: scenario file missing"},
		},
		{
			name: "suite of scenarios with regressions",
			suites: []Suite{ScenarioSuite("library", []ScenarioResult{
				{Scenario: "flat", Outcome: "pass", Seconds: 3},
				{Scenario: "slippery <patch> & \"ice\"", Outcome: "pass", Regressions: []string{"steps 14 < baseline 20 (tolerance 2)", "peak friction utilization 0.91 > baseline 0.70 + 0.05"}},
				{Scenario: "push", Outcome: "tripped"},
				{Scenario: "broken", Err: errors.New("scenario file missing")},
				{Scenario: "greeting\x01with control byte", Outcome: "pass"},
				{Scenario: "watchdog-test", Outcome: "tripped", Expected: "tripped"},
				{Scenario: "watchdog-test-no-trip", Outcome: "pass", Expected: "tripped"},
			})},
			wantTests: 7, wantFail: 3, wantErrors: 1,
			wantInFailure: []string{"steps 14 < baseline 20", "peak friction utilization 0.91", `outcome "tripped", want "pass"`, `outcome "pass", want "tripped"`},
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			var buf bytes.Buffer
			if err := WriteJUnit(&buf, tc.suites...); err != nil {
				t.Fatal(err)
			}
			var doc xmlTestSuites
			if err := xml.Unmarshal(buf.Bytes(), &doc); err != nil {
				t.Fatalf("output does not parse back: %v\n%s", err, buf.String())
			}
			if doc.Tests != tc.wantTests || doc.Failures != tc.wantFail || doc.Skipped != tc.wantSkip || doc.Errors != tc.wantErrors {
				t.Errorf("totals tests=%d failures=%d skipped=%d errors=%d, want %d %d %d %d",
					doc.Tests, doc.Failures, doc.Skipped, doc.Errors, tc.wantTests, tc.wantFail, tc.wantSkip, tc.wantErrors)
			}
			// Count the elements themselves, not only the totals we wrote.
			var cases, fails, skips, errs int
			var msgs []string
			for _, s := range doc.Suites {
				if s.Tests != len(s.Cases) {
					t.Errorf("suite %q says tests=%d but has %d cases", s.Name, s.Tests, len(s.Cases))
				}
				for _, c := range s.Cases {
					cases++
					if c.Failure != nil {
						fails++
						msgs = append(msgs, c.Failure.Message)
					}
					if c.Skipped != nil {
						skips++
					}
					if c.Error != nil {
						errs++
						msgs = append(msgs, c.Error.Message)
					}
				}
			}
			if cases != tc.wantTests || fails != tc.wantFail || skips != tc.wantSkip || errs != tc.wantErrors {
				t.Errorf("elements: %d testcase, %d failure, %d skipped, %d error; want %d %d %d %d",
					cases, fails, skips, errs, tc.wantTests, tc.wantFail, tc.wantSkip, tc.wantErrors)
			}
			all := strings.Join(msgs, "\n")
			for _, w := range tc.wantInFailure {
				if !strings.Contains(all, w) {
					t.Errorf("failure messages lack %q:\n%s", w, all)
				}
			}
		})
	}
}

type failingWriter struct{}

func (failingWriter) Write([]byte) (int, error) { return 0, errors.New("disk full") }

func TestWriteJUnitReportsWriteError(t *testing.T) {
	err := WriteJUnit(failingWriter{}, Suite{Name: "x", Cases: []Case{{Name: "a"}}})
	if err == nil || !strings.Contains(err.Error(), "disk full") {
		t.Fatalf("got %v, want an error naming the write failure", err)
	}
}

// A CI system shows a JUnit file's green cases to people signing off a
// firmware: the file carries the safety caution like every other report.
func TestJUnitCarriesTheSafetyCaution(t *testing.T) {
	var buf bytes.Buffer
	s := Suite{Name: "s", Cases: []Case{{Name: "c", Class: "k"}}}
	if err := WriteJUnit(&buf, s); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(buf.String(), record.Caution) {
		t.Fatalf("JUnit XML without the safety caution:\n%s", buf.String())
	}
	var doc xmlTestSuites
	if err := xml.Unmarshal(buf.Bytes(), &doc); err != nil || doc.Tests != 1 {
		t.Fatalf("the caution broke the document: %v, %d tests", err, doc.Tests)
	}
}

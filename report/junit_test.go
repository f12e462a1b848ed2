package report

import (
	"bytes"
	"encoding/xml"
	"errors"
	"strings"
	"testing"
)

func TestWriteJUnitParsesBack(t *testing.T) {
	tests := []struct {
		name                          string
		suites                        []Suite
		wantTests, wantFail, wantSkip int
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
			name: "suite of scenarios with regressions",
			suites: []Suite{ScenarioSuite("library", []ScenarioResult{
				{Scenario: "flat", Outcome: "pass", Seconds: 3},
				{Scenario: "slippery <patch> & \"ice\"", Outcome: "pass", Regressions: []string{"steps 14 < baseline 20 (tolerance 2)", "peak friction utilization 0.91 > baseline 0.70 + 0.05"}},
				{Scenario: "push", Outcome: "tripped"},
				{Scenario: "broken", Err: errors.New("scenario file missing")},
				{Scenario: "greeting\x01with control byte", Outcome: "pass"},
			})},
			wantTests: 5, wantFail: 3,
			wantInFailure: []string{"steps 14 < baseline 20", "peak friction utilization 0.91", `outcome "tripped"`, "could not run: scenario file missing"},
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
			if doc.Tests != tc.wantTests || doc.Failures != tc.wantFail || doc.Skipped != tc.wantSkip {
				t.Errorf("totals tests=%d failures=%d skipped=%d, want %d %d %d",
					doc.Tests, doc.Failures, doc.Skipped, tc.wantTests, tc.wantFail, tc.wantSkip)
			}
			// Count the elements themselves, not only the totals we wrote.
			var cases, fails, skips int
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
				}
			}
			if cases != tc.wantTests || fails != tc.wantFail || skips != tc.wantSkip {
				t.Errorf("elements: %d testcase, %d failure, %d skipped; want %d %d %d", cases, fails, skips, tc.wantTests, tc.wantFail, tc.wantSkip)
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

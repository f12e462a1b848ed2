package report_test

import (
	"os"

	"gaitrig/report"
)

// A nightly suite writes one test case per scenario; the failure message
// lists what regressed against the baseline.
func ExampleWriteJUnit() {
	suite := report.ScenarioSuite("nightly", []report.ScenarioResult{
		{Scenario: "level-demo", Outcome: "pass", Seconds: 4.2},
		{Scenario: "low-friction-patch", Outcome: "pass", Seconds: 3.9,
			Regressions: []string{"peak friction utilization 0.93, baseline 0.71 + tolerance 0.05"}},
	})
	if err := report.WriteJUnit(os.Stdout, suite); err != nil {
		panic(err)
	}
	// Output:
	// <?xml version="1.0" encoding="UTF-8"?>
	// <!-- A passing simulation is not a safety certificate: it shows how a model of the walker behaved against this firmware and says nothing certain about the real machine. Treadmill and overground trials need the lab's own safety procedure, a fall-arrest harness or gantry, a hardware e-stop within reach of the operator, and the local rules and qualified staff that govern such trials. -->
	// <testsuites name="gaitrig" tests="2" failures="1" errors="0" skipped="0" time="8.100">
	//   <testsuite name="nightly" tests="2" failures="1" errors="0" skipped="0" time="8.100">
	//     <testcase name="level-demo" classname="nightly" time="4.200"></testcase>
	//     <testcase name="low-friction-patch" classname="nightly" time="3.900">
	//       <failure message="1 problem(s): peak friction utilization 0.93, baseline 0.71 + tolerance 0.05" type="failure">peak friction utilization 0.93, baseline 0.71 + tolerance 0.05</failure>
	//     </testcase>
	//   </testsuite>
	// </testsuites>
}

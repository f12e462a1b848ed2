package conformance

import (
	"io"

	"gaitrig/report"
)

// WriteJUnit writes the report as one JUnit XML suite, one test case per
// check: a failed check is a failure, a check that does not apply to the
// link is skipped, and a check that could not run or could not be judged
// on a loaded host is an error (CI systems tell "the firmware is wrong"
// from "nothing was checked"). An optional
// check that failed is written as a passing case whose output says so, so
// that it shows without failing the build.
func (r *Report) WriteJUnit(w io.Writer) error {
	s := report.Suite{Name: "gaitrig conformance " + r.Link}
	for _, c := range r.Checks {
		jc := report.Case{Name: c.Name, Class: "conformance", Seconds: c.Seconds, Detail: c.What + ": " + c.Seen}
		switch {
		case c.Status == Fail && c.Required:
			jc.Failure = c.Seen
		case c.Status == Fail:
			jc.Detail = "optional check failed: " + jc.Detail
		case c.Status == Skipped:
			jc.Skipped = c.Seen
		case c.Status == NotRun || c.Status == HostStall:
			jc.Error = c.Seen
		}
		s.Cases = append(s.Cases, jc)
	}
	return report.WriteJUnit(w, s)
}

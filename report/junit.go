package report

import (
	"encoding/xml"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"gaitrig/record"
)

// Case is one JUnit test case: a criterion of a single run, or one
// scenario of a suite.
type Case struct {
	// Name is the test case name shown by the CI system.
	Name string
	// Class groups cases in CI views; the scenario name is a good choice.
	Class string
	// Seconds is the time the case took (simulated or wall, as the caller
	// states in Detail); non-finite or negative values are written as 0.
	Seconds float64
	// Failure is the one-line failure message; empty means the case passed.
	Failure string
	// Error, when not empty, says the case could not be run at all (a
	// missing scenario, a link that never came up). It is written as an
	// <error> element, which CI systems tell apart from a failure.
	Error string
	// Detail is the longer text inside the failure element (or, for a
	// passing case, written to system-out).
	Detail string
	// Skipped, when not empty, marks the case skipped with this reason.
	Skipped string
}

// Suite is one JUnit test suite.
type Suite struct {
	// Name is the suite name, for example the scenario or the library.
	Name string
	// Cases are the test cases in the order they are written.
	Cases []Case
}

// ScenarioResult is one scenario's outcome in a suite run, compared with
// its baseline.
type ScenarioResult struct {
	// Scenario is the scenario's name.
	Scenario string
	// Outcome is the run outcome: pass, fail, tripped or aborted.
	Outcome string
	// Expected is the outcome the baseline records; empty means "pass". A
	// scenario built to trip (a watchdog test) expects "tripped".
	Expected string
	// Seconds is the wall time the scenario took.
	Seconds float64
	// Regressions lists, one per entry, what got worse than the baseline
	// beyond its tolerance, in words a person understands.
	Regressions []string
	// Err, when not nil, is why the scenario could not be run at all.
	Err error
}

// ScenarioSuite makes one test case per scenario: a case is an error when
// the scenario could not run, and fails when its outcome differs from the
// expected one or when anything regressed; the failure message lists what
// regressed.
func ScenarioSuite(name string, results []ScenarioResult) Suite {
	s := Suite{Name: name}
	for _, r := range results {
		c := Case{Name: r.Scenario, Class: name, Seconds: r.Seconds}
		if r.Err != nil {
			c.Error = "could not run: " + r.Err.Error()
			c.Detail = c.Error
			s.Cases = append(s.Cases, c)
			continue
		}
		want := r.Expected
		if want == "" {
			want = "pass"
		}
		var why []string
		if r.Outcome != want {
			why = append(why, "outcome "+strconv.Quote(r.Outcome)+", want "+strconv.Quote(want))
		}
		why = append(why, r.Regressions...)
		if len(why) > 0 {
			c.Failure = fmt.Sprintf("%d problem(s): %s", len(why), strings.Join(why, "; "))
			c.Detail = strings.Join(why, "\n")
		}
		s.Cases = append(s.Cases, c)
	}
	return s
}

// The XML shapes of the common testsuites/testsuite/testcase/failure
// schema that CI systems read.
type xmlTestSuites struct {
	XMLName  xml.Name       `xml:"testsuites"`
	Name     string         `xml:"name,attr,omitempty"`
	Tests    int            `xml:"tests,attr"`
	Failures int            `xml:"failures,attr"`
	Errors   int            `xml:"errors,attr"`
	Skipped  int            `xml:"skipped,attr"`
	Time     string         `xml:"time,attr"`
	Suites   []xmlTestSuite `xml:"testsuite"`
}

type xmlTestSuite struct {
	Name     string        `xml:"name,attr"`
	Tests    int           `xml:"tests,attr"`
	Failures int           `xml:"failures,attr"`
	Errors   int           `xml:"errors,attr"`
	Skipped  int           `xml:"skipped,attr"`
	Time     string        `xml:"time,attr"`
	Cases    []xmlTestCase `xml:"testcase"`
}

type xmlTestCase struct {
	Name      string      `xml:"name,attr"`
	ClassName string      `xml:"classname,attr"`
	Time      string      `xml:"time,attr"`
	Failure   *xmlFailure `xml:"failure,omitempty"`
	Error     *xmlFailure `xml:"error,omitempty"`
	Skipped   *xmlSkipped `xml:"skipped,omitempty"`
	SystemOut string      `xml:"system-out,omitempty"`
}

type xmlFailure struct {
	Message string `xml:"message,attr"`
	Type    string `xml:"type,attr"`
	Text    string `xml:",chardata"`
}

type xmlSkipped struct {
	Message string `xml:"message,attr"`
}

func junitSeconds(s float64) (float64, string) {
	if math.IsNaN(s) || math.IsInf(s, 0) || s < 0 {
		s = 0
	}
	return s, strconv.FormatFloat(s, 'f', 3, 64)
}

// xmlSafe drops characters XML 1.0 cannot carry at all (most control
// characters); encoding/xml escapes the rest. A firmware greeting with a
// stray control byte must not make the whole file unreadable.
func xmlSafe(s string) string {
	return strings.Map(func(r rune) rune {
		switch {
		case r == '\t' || r == '\n' || r == '\r':
			return r
		case r < 0x20, r == 0xFFFE, r == 0xFFFF:
			return -1
		}
		return r
	}, s)
}

// WriteJUnit writes the suites as one JUnit XML document
// (testsuites/testsuite/testcase/failure) with totals filled in.
func WriteJUnit(w io.Writer, suites ...Suite) error {
	doc := xmlTestSuites{Name: "gaitrig"}
	var total float64
	for _, s := range suites {
		xs := xmlTestSuite{Name: xmlSafe(s.Name)}
		var st float64
		for _, c := range s.Cases {
			secs, txt := junitSeconds(c.Seconds)
			st += secs
			xc := xmlTestCase{Name: xmlSafe(c.Name), ClassName: xmlSafe(c.Class), Time: txt}
			if xc.ClassName == "" {
				xc.ClassName = xs.Name
			}
			switch {
			case c.Error != "":
				xc.Error = &xmlFailure{Message: xmlSafe(c.Error), Type: "error", Text: xmlSafe(c.Detail)}
				xs.Errors++
			case c.Failure != "":
				xc.Failure = &xmlFailure{Message: xmlSafe(c.Failure), Type: "failure", Text: xmlSafe(c.Detail)}
				xs.Failures++
			case c.Skipped != "":
				xc.Skipped = &xmlSkipped{Message: xmlSafe(c.Skipped)}
				xs.Skipped++
			default:
				xc.SystemOut = xmlSafe(c.Detail)
			}
			xs.Tests++
			xs.Cases = append(xs.Cases, xc)
		}
		_, xs.Time = junitSeconds(st)
		total += st
		doc.Tests += xs.Tests
		doc.Failures += xs.Failures
		doc.Errors += xs.Errors
		doc.Skipped += xs.Skipped
		doc.Suites = append(doc.Suites, xs)
	}
	_, doc.Time = junitSeconds(total)
	if _, err := io.WriteString(w, xml.Header); err != nil {
		return fmt.Errorf("write JUnit XML: %w", err)
	}
	// A CI page shows these cases as green to people who sign off a
	// firmware, so the file carries the safety caution like every report;
	// a comment, because JUnit has no element every consumer keeps.
	if _, err := io.WriteString(w, "<!-- "+record.Caution+" -->\n"); err != nil {
		return fmt.Errorf("write JUnit XML: %w", err)
	}
	enc := xml.NewEncoder(w)
	enc.Indent("", "  ")
	if err := enc.Encode(doc); err != nil {
		return fmt.Errorf("write JUnit XML: %w", err)
	}
	if _, err := io.WriteString(w, "\n"); err != nil {
		return fmt.Errorf("write JUnit XML: %w", err)
	}
	return nil
}

package report

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"

	"gaitrig/record"
)

// HTMLFile is the report's file name inside a run folder.
const HTMLFile = "report.html"

// JUnitFile is the JUnit XML file name inside a run folder.
const JUnitFile = "junit.xml"

// Render writes the HTML report of run to w. Telemetry is streamed from
// the run folder. A run that is incomplete (no summary, a truncated or
// unreadable telemetry file) still gets a report: it shows what was
// recorded and says plainly, near the top, what is missing.
func Render(w io.Writer, run *record.Run) error {
	if run == nil {
		return errors.New("report: no run to render")
	}
	var notes []string
	var src tickSource
	tr, err := run.Ticks()
	if err != nil {
		notes = append(notes, "Telemetry could not be read, so the time plots are empty: "+err.Error())
	} else {
		defer tr.Close()
		src = tr
	}
	v := viewOf(&run.Manifest, src, run.Steps, run.Events, run.Summary)
	if tr != nil {
		if err := tr.Err(); err != nil {
			notes = append(notes, fmt.Sprintf("Telemetry stops at a bad row; plots show the %d rows before it: %v", tr.Rows(), err))
		}
		if tr.Truncated() {
			notes = append(notes, fmt.Sprintf("The last telemetry row was cut off (the run was killed mid-write); plots show the %d complete rows.", tr.Rows()))
		}
	}
	// The run reader's own notes (truncated steps or events, missing
	// summary) come first: they say what the whole report lacks.
	v.Warnings = append(append(v.Warnings, run.Notes...), notes...)
	return renderView(w, v, defaultMaxPoints)
}

// WriteHTML reads the run folder dir and writes its report to
// dir/report.html. The file is written under a temporary name and renamed,
// so a failed render never leaves a half-written report (or destroys an
// older one).
func WriteHTML(dir string) error {
	run, err := record.Open(dir)
	if err != nil {
		return fmt.Errorf("report: cannot read run folder %s: %w", dir, err)
	}
	var buf bytes.Buffer
	if err := Render(&buf, run); err != nil {
		return fmt.Errorf("report: %s: %w", dir, err)
	}
	return writeAtomic(filepath.Join(dir, HTMLFile), buf.Bytes())
}

// RunSuite makes the JUnit suite of a single run: one test case per pass
// criterion, named after it, failing when the criterion was not met. A run
// that has no summary (killed) gets one failing case saying so; a run that
// tripped or was aborted while every criterion passed gets a failing
// "outcome" case too, so CI never shows such a run as green. A nil run
// gives one case in error.
func RunSuite(run *record.Run) Suite {
	if run == nil {
		return Suite{Name: "gaitrig", Cases: []Case{{Name: "run", Error: "no run folder was read"}}}
	}
	name := run.Manifest.Scenario
	if name == "" {
		name = filepath.Base(run.Dir)
	}
	s := Suite{Name: name}
	sum := run.Summary
	if sum == nil {
		s.Cases = append(s.Cases, Case{Name: "run finished", Class: name,
			Failure: "summary.json is missing: the run did not finish (killed, or still running)",
			Detail:  "run folder " + run.Dir})
		return s
	}
	secs := sum.SimTimeS
	failed := false
	for _, c := range sum.Criteria {
		tc := Case{Name: c.Name, Class: name, Detail: fmt.Sprintf("value %s, limit %s", fmtFloat(c.Value), fmtFloat(c.Limit))}
		if !c.Pass {
			failed = true
			tc.Failure = fmt.Sprintf("criterion %s not met: value %s, limit %s", c.Name, fmtFloat(c.Value), fmtFloat(c.Limit))
		}
		s.Cases = append(s.Cases, tc)
	}
	if len(sum.Criteria) == 0 || (!failed && sum.Outcome != record.Pass) {
		tc := Case{Name: "outcome", Class: name, Seconds: secs, Detail: "outcome " + string(sum.Outcome)}
		if sum.Outcome != record.Pass {
			tc.Failure = "run outcome " + strconv.Quote(string(sum.Outcome))
			if sum.Reason != "" {
				tc.Failure += ": " + sum.Reason
			}
		}
		s.Cases = append(s.Cases, tc)
	} else if len(s.Cases) > 0 && !math.IsNaN(secs) {
		// Put the run's simulated time on the first case so the suite's
		// total time is the run's length.
		s.Cases[0].Seconds = secs
	}
	return s
}

// WriteRunJUnit reads the run folder dir and writes dir/junit.xml with one
// test case per criterion (see RunSuite).
func WriteRunJUnit(dir string) error {
	run, err := record.Open(dir)
	if err != nil {
		return fmt.Errorf("report: cannot read run folder %s: %w", dir, err)
	}
	var buf bytes.Buffer
	if err := WriteJUnit(&buf, RunSuite(run)); err != nil {
		return err
	}
	return writeAtomic(filepath.Join(dir, JUnitFile), buf.Bytes())
}

// writeAtomic writes data to path through a temporary file in the same
// folder and a rename.
func writeAtomic(path string, data []byte) error {
	f, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return fmt.Errorf("report: %w", err)
	}
	tmp := f.Name()
	_, werr := f.Write(data)
	cerr := f.Close()
	if werr == nil {
		werr = cerr
	}
	if werr == nil {
		werr = os.Chmod(tmp, 0o644)
	}
	if werr == nil {
		werr = os.Rename(tmp, path)
	}
	if werr != nil {
		os.Remove(tmp)
		return fmt.Errorf("report: write %s: %w", path, werr)
	}
	return nil
}

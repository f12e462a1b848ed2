package main

import (
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"

	"gaitrig/hil"
	"gaitrig/record"
	"gaitrig/report"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// resolveScenario loads a scenario by file path or built-in name; every
// failure is a usage error (exit code 2).
func resolveScenario(arg string) (*scenarios.Scenario, error) {
	sc, err := scenarios.Resolve(arg)
	if err != nil {
		return nil, rig.ConfigError(err)
	}
	return sc, nil
}

// loadBuiltin loads a scenario of the built-in library.
func loadBuiltin(name string) (*scenarios.Scenario, error) {
	return resolveScenario(scenarios.BuiltinPrefix + name)
}

// stepPrinter prints a line per completed step to w.
func stepPrinter(w io.Writer) func(hil.StepInfo) {
	return func(s hil.StepInfo) {
		fmt.Fprintf(w, "step %3d  t=%6.2f s  length %.3f m  speed %.2f m/s  peak friction use %3.0f%%  min normal %6.1f N\n",
			s.Index, s.SimTimeS, s.LengthM, s.SpeedMPS, 100*s.PeakUtil, s.MinNormal)
	}
}

// lineLogger writes each sentence of the run's log as a line of w.
func lineLogger(w io.Writer) func(string) {
	return func(line string) { fmt.Fprintln(w, line) }
}

// runLogger is lineLogger for a run whose header (printed on stdout
// unless json) names the link already: the rig's own "link: …" line is
// left out there, so a terminal does not show it twice; with --json it
// stays, as the only human-readable note of the link.
func runLogger(w io.Writer, json bool) func(string) {
	return func(line string) {
		if !json && strings.HasPrefix(line, "link: ") {
			return
		}
		fmt.Fprintln(w, line)
	}
}

// outcomeCode is the exit code for a run outcome.
func outcomeCode(o record.Outcome) int {
	switch o {
	case record.Pass:
		return exitPass
	case record.Invalid:
		return exitInvalid
	}
	return exitFail
}

// printSummary writes the plain-text verdict of one run.
func printSummary(w io.Writer, r rig.Result) {
	s := r.Summary
	fmt.Fprintf(w, "\noutcome: %s", strings.ToUpper(string(s.Outcome)))
	if s.Reason != "" {
		fmt.Fprintf(w, " (%s)", s.Reason)
	}
	fmt.Fprintf(w, "\nsteps %d, simulated %.2f s, mean speed %.3f m/s, peak friction utilization %.2f, min normal force %.1f N\n",
		s.Steps, s.SimTimeS, s.MeanSpeedMPS, s.PeakFrictionUtilization, s.MinNormalForceN)
	if s.LatencyUS != nil {
		// NaN: no command was timed (a run that tripped before any came):
		// a dash, not a zero that reads as a very fast firmware.
		us := func(v float64) string {
			if math.IsNaN(v) {
				return "–"
			}
			return fmt.Sprintf("%.0f µs", v)
		}
		fmt.Fprintf(w, "command latency p50 %s, p99 %s, max %s; deadline misses %d\n",
			us(s.LatencyUS.P50), us(s.LatencyUS.P99), us(s.LatencyUS.Max), s.DeadlineMisses)
	}
	if len(s.Alarms) > 0 {
		var parts []string
		for _, k := range sortedKeys(s.Alarms) {
			parts = append(parts, fmt.Sprintf("%s×%d", k, s.Alarms[k]))
		}
		fmt.Fprintf(w, "alarms: %s\n", strings.Join(parts, ", "))
	}
	for _, c := range s.Criteria {
		mark := "pass"
		if !c.Pass {
			mark = "FAIL"
		}
		fmt.Fprintf(w, "  [%s] %-28s value %-12s limit %s\n", mark, c.Name, report.FormatNumber(c.Value), report.FormatNumber(c.Limit))
	}
	fmt.Fprintf(w, "run folder: %s\n", r.Dir)
	if _, err := os.Stat(filepath.Join(r.Dir, report.HTMLFile)); err == nil {
		fmt.Fprintf(w, "report:     %s\n", filepath.Join(r.Dir, report.HTMLFile))
	}
}

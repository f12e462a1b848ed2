package main

import (
	"fmt"
	"io"
	"math"
	"path/filepath"
	"runtime"

	"gaitrig/batch"
	"gaitrig/report"
	"gaitrig/rig"
)

func init() {
	commands["preflight"] = command{"pre-trial go/no-go battery against the connected firmware", cmdPreflight}
}

func cmdPreflight(args []string, stdout, stderr io.Writer) int {
	fs := newFlagSet("preflight", "", `
The pre-trial go/no-go check. Runs a fixed battery against the connected
firmware: nominal; half the friction; uphill and downhill (2°); a forward push;
added command latency; tripled sensor noise; on a treadmill scenario also a
belt speed-up and a slow-down pulse. Each check must pass the
scenario's own criteria (default scenario: the level-ground demo). Prints a
table of margins (friction utilization, normal-force margin, steps, latency)
and GO only when every check passed; exit code 0 for GO, 1 for NO-GO.`, stderr)
	link := fs.String("link", "builtin", rig.LinkHelp())
	scenario := fs.String("scenario", "level-demo", "base scenario (file or built-in name)")
	out := fs.String("out", "runs", "parent folder for the run folders")
	if done, code := parseFlags(fs, args); done {
		return code
	}
	spec, err := rig.ParseLink(*link)
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig preflight:", err)
		return exitConfig
	}
	base, err := resolveScenario(*scenario)
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig preflight:", err)
		return exitCodeFor(err)
	}
	// Every core: only in-process lockstep checks share the machine (the
	// scheduler runs the others one at a time), and the table is printed
	// in battery order whatever ran first.
	pf := batch.Preflight{Link: spec.String(), Jobs: runtime.NumCPU(), OnDone: progressLine(stdout), Checks: batch.BatteryFor(base)}
	variants, err := pf.Variants(base)
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig preflight:", err)
		return exitConfig
	}
	if pf.Dir, err = batch.NewDir(*out, "preflight"); err != nil {
		fmt.Fprintln(stderr, "gaitrig preflight:", err)
		return exitConfig
	}
	fmt.Fprintf(stdout, "preflight of %s on link %s: %d checks, run folders in %s\n\n", base.Name, spec, len(variants), pf.Dir)
	ctx, stop := signalContext()
	defer stop()
	res, err := pf.Run(ctx, variants)
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig preflight:", err)
		return exitConfig
	}

	fmt.Fprintf(stdout, "\n%-14s %-8s %5s %12s %10s %12s %12s  %s\n", "check", "outcome", "steps", "friction use", "margin", "min normal", "latency p99", "what")
	for _, c := range res.Checks {
		if c.Err != nil {
			fmt.Fprintf(stdout, "%-14s %-8s could not run: %v\n", c.Check.Name, "ERROR", c.Err)
			continue
		}
		s := c.Result.Summary
		lat := "-"
		if s.LatencyUS != nil && !math.IsNaN(s.LatencyUS.P99) {
			lat = fmt.Sprintf("%.0f µs", s.LatencyUS.P99)
		}
		fmt.Fprintf(stdout, "%-14s %-8s %5d %12s %10s %10s N %12s  %s\n", c.Check.Name, s.Outcome, s.Steps,
			fmt.Sprintf("%.0f%%", 100*s.PeakFrictionUtilization), fmt.Sprintf("%.0f%%", 100*(1-s.PeakFrictionUtilization)),
			report.FormatNumber(s.MinNormalForceN), lat, c.Check.What)
	}
	if err := batch.WriteJUnit(filepath.Join(pf.Dir, report.JUnitFile), "gaitrig preflight", res.Results); err != nil {
		fmt.Fprintln(stderr, "gaitrig preflight:", err)
	}
	for _, r := range res.Results {
		for _, g := range r.Regressions {
			fmt.Fprintf(stdout, "  %s: %s\n", r.Scenario, g)
		}
	}
	verdict := "GO"
	if !res.Go {
		verdict = "NO-GO"
	}
	fmt.Fprintf(stdout, "\nverdict: %s\n", verdict)
	if res.Go {
		fmt.Fprintln(stdout, "Every check passed in simulation. This clears the firmware for the next step of the lab's own procedure, nothing more.")
	} else {
		fmt.Fprintln(stdout, "At least one check failed: do not proceed to a trial with this firmware build.")
	}
	fmt.Fprintln(stdout, "\n"+safetyCaution)
	if !res.Go {
		return exitFail
	}
	return exitPass
}

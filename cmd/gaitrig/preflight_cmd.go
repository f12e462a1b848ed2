package main

import (
	"context"
	"fmt"
	"io"
	"math"
	"path/filepath"
	"runtime"

	"gaitrig/batch"
	"gaitrig/history"
	"gaitrig/record"
	"gaitrig/report"
	"gaitrig/rig"
)

func init() {
	commands["preflight"] = command{"pre-trial go/no-go battery against the connected firmware", cmdPreflight}
	jsonResults["preflight"] = preflightResult{}
}

// preflightResult is what preflight prints with --json.
type preflightResult struct {
	Scenario string           `json:"scenario"` // the base scenario
	Link     string           `json:"link"`     // the firmware's link, as --link spells it
	Folder   string           `json:"folder"`   // the folder holding every check's run folder
	Checks   []preflightCheck `json:"checks"`   // in battery order
	Go       bool             `json:"go"`       // every check ran and passed
	Caution  string           `json:"caution"`  // the safety caution
}

// preflightCheck is one check of the battery.
type preflightCheck struct {
	Name                    string   `json:"name"`                      // the check's name
	What                    string   `json:"what"`                      // what the check changes, in words
	Pass                    bool     `json:"pass"`                      // ran and passed the scenario's criteria
	Outcome                 string   `json:"outcome"`                   // pass, fail, tripped, aborted, or error when it could not run
	Steps                   int      `json:"steps"`                     // steps completed
	PeakFrictionUtilization float64  `json:"peak_friction_utilization"` // largest |F_t|/(μ_s N)
	FrictionHeadroom        float64  `json:"friction_headroom"`         // 1 − peak_friction_utilization: not a margin search
	MinNormalForceN         float64  `json:"min_normal_force_n"`        // least stance-foot normal force, N
	LatencyP99US            *float64 `json:"latency_p99_us"`            // null in lockstep
	Problems                []string `json:"problems"`                  // why a check that ran did not pass, in words
	Error                   string   `json:"error,omitempty"`           // why the check could not run
	RunFolder               string   `json:"run_folder"`                // the check's run folder (with --seeds: the worst seed's)
	// Seeds is the check over --seeds N seeds: pass rate with its 95 %
	// Wilson interval and every seed's run (absent with one seed).
	Seeds *batch.SeedsResult `json:"seeds,omitempty"`
}

func cmdPreflight(args []string, stdout, stderr io.Writer) int {
	c := newCmdline("preflight", "", `
The pre-trial go/no-go check. Runs a fixed battery against the connected
firmware: nominal; half the friction; uphill and downhill (2°); a forward push;
added command latency; tripled sensor noise; on a treadmill scenario also a
belt speed-up and a slow-down pulse. Each check must pass the
scenario's own criteria (default scenario: the level-ground demo). Prints a
table per check: peak friction use and the friction headroom left (1 minus
the peak use; not a margin found by searching), least normal force, steps and
latency, and GO only when every check passed; exit code 0 for GO, 1 for
NO-GO, 2 for bad usage.`, stdout, stderr)
	link := c.String("link", "builtin", "the firmware's `LINK` for every check, syntax as in gaitrig run --help")
	scenario := c.String("scenario", "level-demo", "base `SCENARIO` (file or built-in name)")
	out := c.String("out", "runs", "parent `FOLDER` for the run folders")
	envelope := c.Bool("envelope", true, "also measure the margins the scenario's margins block sets minima for and the closed-loop stability; GO needs both (see gaitrig margins, gaitrig stability)")
	seeds := c.Int("seeds", 1, "run every check with `N` seeds of noise, drops and latency (pass rate with its Wilson interval and the worst run; GO needs every seed), and with --envelope every margin value too")
	hist := addHistoryFlags(c)
	c.jsonFlag()
	if done, code := c.parse(args); done {
		return code
	}
	if c.NArg() != 0 {
		return c.usageError("takes no arguments, got %q", c.Args())
	}
	spec, err := rig.ParseLink(*link)
	if err != nil {
		return c.usageError("%v", err)
	}
	base, err := resolveScenario(*scenario)
	if err != nil {
		return c.fail(err)
	}
	w := c.progress()
	// Every core: only in-process lockstep checks share the machine (the
	// scheduler runs the others one at a time), and the table is printed
	// in battery order whatever ran first.
	if *seeds < 1 {
		return c.usageError("--seeds must be at least 1, got %d", *seeds)
	}
	pf := batch.Preflight{Link: spec.String(), Jobs: runtime.NumCPU(), Checks: batch.BatteryFor(base), Seeds: *seeds}
	variants, err := pf.Variants(base)
	if err != nil {
		return c.fail(rig.ConfigError(err))
	}
	width := len("check")
	for _, v := range variants {
		width = max(width, len(v.Name))
	}
	if pf.Seeds > 1 {
		width += len(fmt.Sprintf("-seed%d", base.Sensors.Seed+int64(pf.Seeds)-1))
	}
	pf.OnDone = progressLine(w, width)
	if pf.Dir, err = batch.NewDir(*out, "preflight"); err != nil {
		return c.fail(rig.ConfigError(err))
	}
	fmt.Fprintf(w, "preflight of %s on link %s: %s, run folders in %s\n", base.Name, spec, plural(len(variants), "check"), pf.Dir)
	if pf.Seeds > 1 {
		fmt.Fprintf(w, "every check with %d seeds (sensors.seed %d … %d); the table shows each check's worst run\n", pf.Seeds, base.Sensors.Seed, base.Sensors.Seed+int64(pf.Seeds)-1)
	}
	fmt.Fprintln(w)
	ctx, stop := signalContext()
	defer stop()
	hs, err := hist.open(ctx)
	if err != nil {
		return c.fail(err)
	}
	if hs != nil {
		defer hs.Close()
	}
	res, err := pf.Run(ctx, variants)
	if err != nil {
		return c.fail(rig.ConfigError(err))
	}
	// Stored in the history: every check's run (the worst seed's with
	// --seeds) under the check's name, then the envelope under the
	// scenario's.
	var herr error
	if hs != nil {
		for i, ch := range res.Checks {
			if ch.Err != nil || ch.Result.Summary.Outcome == "" {
				continue
			}
			if herr = hist.store(hs, "preflight", variants[i])(ch.Result); herr != nil {
				break
			}
		}
	}

	js := preflightResult{Scenario: base.Name, Link: spec.String(), Folder: pf.Dir, Go: res.Go, Caution: record.Caution, Checks: []preflightCheck{}}
	cw := 0
	for _, ch := range res.Checks {
		cw = max(cw, len(ch.Check.Name))
	}
	cw = max(cw, len("check"))
	fmt.Fprintf(w, "\n%-*s  %-8s %5s %12s %17s %12s %12s  %s\n", cw, "check", "outcome", "steps", "friction use", "friction headroom", "min normal", "latency p99", "what")
	for _, ch := range res.Checks {
		pc := preflightCheck{Name: ch.Check.Name, What: ch.Check.What, Pass: ch.Pass, Problems: ch.Problems, RunFolder: ch.Result.Dir, Seeds: ch.Seeds}
		if ch.Err != nil {
			pc.Outcome, pc.Error = "error", ch.Err.Error()
			js.Checks = append(js.Checks, pc)
			fmt.Fprintf(w, "%-*s  %-8s could not run: %v\n", cw, ch.Check.Name, "ERROR", ch.Err)
			continue
		}
		s := ch.Result.Summary
		pc.Outcome, pc.Steps = string(s.Outcome), s.Steps
		pc.PeakFrictionUtilization, pc.FrictionHeadroom = s.PeakFrictionUtilization, frictionHeadroom(s.PeakFrictionUtilization)
		pc.MinNormalForceN = s.MinNormalForceN
		lat := "-"
		if s.LatencyUS != nil && !math.IsNaN(s.LatencyUS.P99) {
			p99 := s.LatencyUS.P99
			pc.LatencyP99US = &p99
			lat = fmt.Sprintf("%.0f µs", p99)
		}
		js.Checks = append(js.Checks, pc)
		fmt.Fprintf(w, "%-*s  %-8s %5d %12s %17s %10s N %12s  %s\n", cw, ch.Check.Name, s.Outcome, s.Steps,
			fmt.Sprintf("%.0f%%", 100*s.PeakFrictionUtilization), fmt.Sprintf("%.0f%%", 100*pc.FrictionHeadroom),
			report.FormatNumber(s.MinNormalForceN), lat, ch.Check.What)
		if sr := ch.Seeds; sr != nil {
			worst := sr.Runs[sr.Worst]
			fmt.Fprintf(w, "%-*s  %d of %d seeds passed, pass rate %.3f (95 %% Wilson interval %.3f … %.3f); worst run seed %d, %s: %s\n",
				cw, "", sr.Passed, sr.N, sr.Rate, sr.Low, sr.High, worst.Seed, worst.Outcome, worst.Dir)
			if sr.Invalid > 0 {
				fmt.Fprintf(w, "%-*s  %d more seeds ran invalid (the host stalled them): not tested\n", cw, "", sr.Invalid)
			}
		}
	}
	if err := batch.WriteJUnit(filepath.Join(pf.Dir, report.JUnitFile), "gaitrig preflight", res.Results); err != nil {
		fmt.Fprintln(stderr, "gaitrig preflight:", err)
	}
	for _, r := range res.Results {
		for _, g := range r.Regressions {
			fmt.Fprintf(w, "  %s: %s\n", r.Scenario, g)
		}
	}
	if *envelope {
		g, ok := printGate(ctx, w, stderr, batch.Gate{Dir: pf.Dir, Link: spec.String(), Jobs: runtime.NumCPU(), Seeds: *seeds}, base)
		if !ok {
			res.Go = false
		}
		if hs != nil && g != nil && herr == nil {
			dir := ""
			if len(res.Checks) > 0 {
				dir = res.Checks[0].Result.Dir
			}
			r := history.FromGate("preflight", base, *g, history.GreetingOf(dir), hist.rev())
			herr = hs.Add(context.Background(), &r)
		}
	}
	code := exitPass
	if !res.Go {
		code = exitFail
	}
	if herr != nil {
		c.fail(fmt.Errorf("history: %w", herr))
		if code == exitPass {
			code = exitConfig // a lost history entry is not a silent pass
		}
	}
	if c.jsonMode() {
		return c.printJSON(js, code)
	}
	verdict := "GO"
	if !res.Go {
		verdict = "NO-GO"
	}
	fmt.Fprintf(w, "\nverdict: %s\n", verdict)
	if res.Go {
		fmt.Fprintln(w, "Every check passed in simulation. This clears the firmware for the next step of the lab's own procedure, nothing more.")
	} else {
		fmt.Fprintln(w, "At least one check failed: do not proceed to a trial with this firmware build.")
	}
	fmt.Fprintln(w, "\n"+safetyCaution)
	return code
}

// frictionHeadroom is the share of the available static friction a check
// left unused at its worst instant: 1 − the peak utilization |F_t|/(μ_s N).
// It is what the table's "friction headroom" column shows; it is not a
// margin (how far the friction could drop before the walker fails), which
// takes a search over variants.
func frictionHeadroom(peakUtilization float64) float64 { return 1 - peakUtilization }

// plural spells a count with its noun: "1 check", "7 checks".
func plural(n int, noun string) string {
	if n == 1 {
		return "1 " + noun
	}
	return fmt.Sprintf("%d %ss", n, noun)
}

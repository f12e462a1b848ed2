package main

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"runtime"

	"gaitrig/batch"
	"gaitrig/history"
	"gaitrig/record"
	"gaitrig/report"
	"gaitrig/rig"
)

func init() {
	commands["margins"] = command{"search how far each condition can go before the firmware fails", cmdMargins}
	jsonResults["margins"] = marginsDoc{}
}

func cmdMargins(args []string, stdout, stderr io.Writer) int {
	c := newCmdline("margins", "SCENARIO", `
The safety envelope by search. For each axis (floor friction; a forward and a
backward hip push at early, mid and late stance; added command latency; slope
up and down; sensor noise multiple; encoder resolution in counts per
revolution; torque-limit fraction; plant mass and leg length off by a
percentage while the firmware is unchanged)
the rig runs a coarse grid from the scenario as written towards harder
conditions, then bisects between the last pass and the first fail until the
bracket is narrower than the tolerance. Each limit comes with the two runs
that decided it; "not monotone" marks an axis where a harder value passed
again. The scenario's margins block chooses the axes and sets the minima a
lab requires (min_friction_ratio, min_push_ns, min_added_latency_ms,
min_slope_deg); the table says which margin misses its minimum and by how
much. Writes margins.html (one survival plot per axis), junit.xml and
margins.json into the search's folder. A run the host spoiled (outcome
invalid, a link that would not open) is made again up to --retries times; a
value still spoiled decides nothing, and an axis that needed it is reported
"not measured" with the reason instead of a limit. Exit code 0 when every
axis was searched and meets its minimum, 1 when one misses it or has no
margin, 3 when nothing missed but an axis was not measured.`, stdout, stderr)
	link := c.String("link", "", "link to the firmware (default: the scenario's); "+rig.LinkHelp())
	out := c.String("out", "runs", "parent folder for the run folders")
	asJSON := c.jsonFlag()
	tol := c.Float64("tolerance", 0, "bisection stops at this fraction of the axis range (default: the scenario's margins.tolerance, 0.02)")
	jobs := c.Int("jobs", runtime.NumCPU(), "runs at once (only in-process lockstep runs share the machine)")
	seeds := c.Int("seeds", 1, "run every value with N seeds of noise, drops and latency; a value passes only when all pass")
	retries := c.Int("retries", batch.DefaultMarginRetries, "make a run the host spoiled again up to `N` times")
	hist := addHistoryFlags(c)
	if done, code := c.parse(args); done {
		return code
	}
	if c.NArg() != 1 {
		return c.usageError("want exactly one SCENARIO")
	}
	if *retries < 0 {
		return c.usageError("--retries must be 0 or more, got %d", *retries)
	}
	m := batch.Margins{Tolerance: *tol, Jobs: *jobs, Seeds: *seeds, Retries: *retries}
	if *retries == 0 {
		m.Retries = -1 // none (the zero value of Margins.Retries is the default)
	}
	if *link != "" {
		spec, err := rig.ParseLink(*link)
		if err != nil {
			fmt.Fprintln(stderr, "gaitrig margins:", err)
			return exitConfig
		}
		m.Link = spec.String()
	}
	sc, err := resolveScenario(c.Arg(0))
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig margins:", err)
		return exitCodeFor(err)
	}
	if m.Dir, err = batch.NewDir(*out, "margins"); err != nil {
		fmt.Fprintln(stderr, "gaitrig margins:", err)
		return exitConfig
	}
	ctx, stop := signalContext()
	defer stop()
	hs, err := hist.open(ctx)
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig margins:", err)
		return exitCodeFor(err)
	}
	if hs != nil {
		defer hs.Close()
	}
	res, err := m.Search(ctx, sc, nil)
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig margins:", err)
		return exitCodeFor(err)
	}
	var herr error
	if hs != nil {
		r := history.FromMargins("margins", sc, res, history.GreetingOf(firstMarginRun(res)), hist.rev())
		if herr = hs.Add(context.Background(), &r); herr != nil {
			fmt.Fprintln(stderr, "gaitrig margins: history:", herr)
		}
	}
	files, ferr := writeMarginsFiles(m.Dir, sc.Name, res)
	if ferr != nil {
		fmt.Fprintln(stderr, "gaitrig margins:", ferr)
	}
	if *asJSON {
		enc := json.NewEncoder(stdout)
		enc.SetEscapeHTML(false)
		enc.SetIndent("", "  ")
		doc := marginsDoc{sc.Name, m.Dir, res, record.Caution}
		if err := enc.Encode(rig.JSONSafe(doc)); err != nil {
			fmt.Fprintln(stderr, "gaitrig margins:", err)
			return exitFail
		}
	} else {
		fmt.Fprintf(stdout, "margins of %s, run folders in %s\n\n", sc.Name, m.Dir)
		fmt.Fprintf(stdout, "%-20s %12s %-6s %10s  %s\n", "axis", "limit", "unit", "±", "decided by (last pass / first fail)")
		for _, a := range res {
			note := ""
			if a.NotMonotone {
				note = " NOT MONOTONE"
			}
			if a.NotMeasured != "" {
				note += " not measured"
			} else if !a.Reached && a.Error == "" {
				note += fmt.Sprintf(" (passed up to the end of the range, %g)", a.Far)
			}
			fmt.Fprintf(stdout, "%-20s %12.4g %-6s %10.3g %s\n", a.Axis, a.Limit, a.Unit, a.Tolerance, note)
			if a.Error != "" {
				fmt.Fprintf(stdout, "    %s\n", a.Error)
			}
			if a.NotMeasured != "" {
				fmt.Fprintf(stdout, "    NOT MEASURED (the host, not the firmware): %s\n", a.NotMeasured)
			}
			if a.FrictionRatio > 0 {
				fmt.Fprintf(stdout, "    μ_s,min %.4g; friction ratio μ_s/μ_s,min %.3g\n", a.MuStaticMin, a.FrictionRatio)
			}
			if !math.IsNaN(a.Required) {
				if a.Meets {
					fmt.Fprintf(stdout, "    meets the required %g %s\n", a.Required, a.Unit)
				} else {
					fmt.Fprintf(stdout, "    MISSES the required %g %s by %g %s\n", a.Required, a.Unit, a.Shortfall, a.Unit)
				}
			}
			if a.LastPass != nil {
				fmt.Fprintf(stdout, "    pass %g: %s\n", a.LastPass.Value, a.LastPass.Dir)
			}
			if a.FirstFail != nil {
				fmt.Fprintf(stdout, "    fail %g: %s (%s: %s)\n", a.FirstFail.Value, a.FirstFail.Dir, a.FirstFail.Outcome, a.FirstFail.Reason)
			}
		}
		for _, f := range files {
			fmt.Fprintln(stdout, "wrote", f)
		}
		fmt.Fprintln(stdout)
		fmt.Fprintln(stdout, record.Caution)
	}
	// A missed minimum is the firmware's (1); an axis the host kept
	// from measuring, with nothing missed, is the host's (3).
	code := exitPass
	for _, a := range res {
		if a.NotMeasured != "" && code == exitPass {
			code = exitInvalid
		}
	}
	for _, a := range res {
		if !a.Meets && a.NotMeasured == "" {
			code = exitFail
		}
	}
	if ferr != nil {
		code = exitFail
	}
	if herr != nil && code == exitPass {
		code = exitConfig // a lost history entry is not a silent pass
	}
	return code
}

// firstMarginRun is a run folder of the search, to read the firmware's
// greeting from ("" when no axis ran).
func firstMarginRun(res []batch.AxisMargin) string {
	for _, a := range res {
		for _, r := range a.Grid {
			if r.Dir != "" {
				return r.Dir
			}
		}
	}
	return ""
}

// marginsDoc is the JSON of a margin search (stdout with --json, and
// margins.json in the search's folder).
type marginsDoc struct {
	Scenario string             `json:"scenario"`
	Dir      string             `json:"dir"`
	Axes     []batch.AxisMargin `json:"axes"`
	Caution  string             `json:"caution"`
}

// writeMarginsFiles writes the search's page, JUnit XML and JSON into its
// folder and returns their paths.
func writeMarginsFiles(dir, scenario string, res []batch.AxisMargin) ([]string, error) {
	page := filepath.Join(dir, report.MarginsHTMLFile)
	if err := report.WriteMarginsHTML(page, batch.MarginsPage(scenario, dir, res)); err != nil {
		return nil, err
	}
	junit := filepath.Join(dir, "junit.xml")
	var b bytes.Buffer
	if err := report.WriteJUnit(&b, batch.MarginsSuite(scenario, res)); err != nil {
		return nil, err
	}
	if err := os.WriteFile(junit, b.Bytes(), 0o644); err != nil {
		return nil, err
	}
	js, err := json.MarshalIndent(rig.JSONSafe(marginsDoc{scenario, dir, res, record.Caution}), "", "  ")
	if err != nil {
		return nil, err
	}
	jsPath := filepath.Join(dir, "margins.json")
	if err := os.WriteFile(jsPath, append(js, '\n'), 0o644); err != nil {
		return nil, err
	}
	return []string{page, junit, jsPath}, nil
}

package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"

	"gaitrig/hil"
	"gaitrig/record"
	"gaitrig/report"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

func init() {
	commands["run"] = command{"run a scenario against a board, a process or the built-in firmware", cmdRun}
	commands["demo"] = command{"the level-ground demo: built-in firmware over the embedded MQTT broker", cmdDemo}
	jsonResults["run"] = runResult{}
	jsonResults["demo"] = runResult{}
}

// runResult is what run and demo print with --json.
type runResult struct {
	Scenario  string          `json:"scenario"`         // scenario name
	Link      string          `json:"link"`             // the link the run used, as in the manifest
	RunFolder string          `json:"run_folder"`       // the run folder ("" when none was created)
	Report    string          `json:"report,omitempty"` // report.html, when written
	Error     string          `json:"error,omitempty"`  // why the run could not be carried out to its end
	Summary   *record.Summary `json:"summary"`          // summary.json; null when the run never started
}

// linkHelp is the help of a --link that may be left empty, from the
// registry of link kinds.
var linkHelp = "the `LINK` to the controller, one of:" + strings.TrimPrefix(rig.LinkHelp(), "controller link, one of:")

// signalContext is cancelled by SIGINT or SIGTERM, so a run ends cleanly
// with outcome aborted and its folder complete. A second signal ends the
// process (interruptContext).
func signalContext() (context.Context, func()) { return interruptContext(os.Stderr) }

func cmdRun(args []string, stdout, stderr io.Writer) int {
	c := newCmdline("run", "SCENARIO", `
Runs one scenario (a YAML file, or the name of a built-in scenario) against
the controller its controller block names, or the one --link names. Writes a
run folder (manifest, telemetry, events, steps, summary) and an HTML report
unless --no-report. SIGINT or SIGTERM ends the run with outcome "aborted" and
everything written. Exit code 0 pass, 1 fail or tripped, 2 bad usage or
configuration.`, stdout, stderr)
	link := c.String("link", "", linkHelp)
	out := c.String("out", "runs", "parent `FOLDER` for the run folder")
	dir := c.String("dir", "", "exact run `FOLDER` to create, new or empty; checked before the link opens (overrides --out)")
	clock := c.String("clock", "", "clock `MODE` override: lockstep or wallclock")
	rigID := c.String("rig", "", "MQTT rig `ID` override")
	noReport := c.Bool("no-report", false, "do not write report.html")
	oldReport := c.Bool("report", true, "")
	c.deprecate("report", "--report=false is now --no-report (the report is written by default)")
	junit := c.Bool("junit", false, "also write junit.xml in the run folder, one test case per criterion")
	parquet := c.Bool("parquet", false, "also export telemetry.parquet")
	quiet := c.Bool("quiet", false, "no line per step")
	maxSteps := c.Int("max-steps", 0, "end after `N` steps (overrides the scenario's run.max_steps)")
	duration := c.Float64("duration", 0, "end after `SECONDS` of simulated time (overrides run.duration_s)")
	force := c.Bool("force", false, "start a wall-clock run over a serial line even when a state and a command take longer on the wire than a tick")
	seeds := c.Int("seeds", 0, "run the scenario with `N` seeds of noise, drops and latency and report the pass rate (Wilson 95 % interval) and the worst run")
	vf := addViewFlags(c, true)
	hist := addHistoryFlags(c)
	c.jsonFlag()
	if done, code := c.parse(args); done {
		return code
	}
	if err := vf.check(); err != nil {
		return c.usageError("%v", err)
	}
	if *maxSteps < 0 || *duration < 0 {
		return c.usageError("--max-steps and --duration must be ≥ 0")
	}
	if c.NArg() != 1 {
		return c.usageError("want exactly one SCENARIO (a file or a built-in name), got %d arguments", c.NArg())
	}
	if *link != "" {
		if _, err := rig.ParseLink(*link); err != nil {
			return c.usageError("%v", err)
		}
	}
	if *dir != "" {
		if err := freshRunDir(*dir); err != nil {
			return c.usageError("%v", err)
		}
	}
	o := rig.Options{Link: *link, OutRoot: *out, RunDir: *dir, Report: *oldReport && !*noReport, JUnit: *junit, Parquet: *parquet,
		Log: runLogger(stderr, c.jsonMode()), Rig: *rigID, MaxSteps: *maxSteps, Duration: *duration, Force: *force}
	if *clock != "" {
		if *clock != string(hil.Lockstep) && *clock != string(hil.Wallclock) {
			return c.usageError("--clock %q: want lockstep or wallclock", *clock)
		}
		o.Clock = hil.ClockMode(*clock)
	}
	sc, err := resolveScenario(c.Arg(0))
	if err != nil {
		return c.fail(err)
	}
	if min := sc.Pass.MinSteps; *maxSteps > 0 && *maxSteps < min {
		c.warn("--max-steps %d is below the scenario's pass.min_steps %d: the run cannot pass", *maxSteps, min)
	}
	// Opened before the run, so a database that cannot be reached stops
	// the command before the link opens, not after the run is lost.
	st, err := hist.open(context.Background())
	if err != nil {
		return c.fail(err)
	}
	if st != nil {
		defer st.Close()
		if *seeds > 0 {
			return c.usageError("--history with --seeds: store single runs or suites; the seeds' pass rate is not stored")
		}
	}
	if *seeds > 0 {
		return runSeeds(sc, o, *seeds, c.jsonMode(), stdout, stderr)
	}
	if !*quiet {
		o.OnStep = stepPrinter(c.progress())
	}
	lv := newLiveView(vf, &o, c.stderr) // changes o: before o is passed on
	if st != nil {
		return runAndReport(c, sc, o, lv, hist.store(st, "run", sc))
	}
	return runAndReport(c, sc, o, lv)
}

// freshRunDir checks a --dir before anything opens: the run folder must be
// new (or an empty folder), as record.Create will require after the link
// is up.
func freshRunDir(dir string) error {
	entries, err := os.ReadDir(dir)
	switch {
	case os.IsNotExist(err):
		return nil
	case err != nil:
		return fmt.Errorf("--dir %s: %v", dir, err)
	case len(entries) > 0:
		return fmt.Errorf("--dir %s already exists and is not empty; name a new folder, or use --out PARENT for a fresh one", dir)
	}
	return nil
}

// runAndReport runs one scenario under a signal context and prints its
// verdict, or the JSON document under --json; it returns the exit code.
//
// Each of after is called with the result of a run that ended with an
// outcome (storing it in a history); an error of one is printed and turns
// exit code 0 into 2, so a lost history entry is not a silent pass.
func runAndReport(c *cmdline, sc *scenarios.Scenario, o rig.Options, lv *liveView, after ...func(rig.Result) error) int {
	ctx, stop := signalContext()
	defer stop()
	if lv != nil {
		defer lv.linger(ctx) // after the link is released (deferred below), before the signals are let go
	}
	res := runResult{Scenario: sc.Name}
	p, err := rig.Prepare(ctx, sc, o)
	if err != nil {
		// Nothing ran: no document, the error on stderr (docs/cli.md).
		return c.fail(err)
	}
	defer p.Close()
	if lv != nil {
		if err := lv.start(p); err != nil {
			return c.fail(err)
		}
	}
	res.Link, res.RunFolder = p.Link, p.Dir
	if !c.jsonMode() {
		fmt.Fprintf(c.stdout, "scenario %s: %s\nlink: %s\n", sc.Name, sc.Description, p.Link)
	}
	r, err := p.Run(ctx)
	if lv != nil {
		var sum *record.Summary
		if r.Summary.Outcome != "" {
			sum = &r.Summary
		}
		lv.finish(sum, r.Dir)
	}
	if r.Dir != "" && r.Summary.Outcome != "" {
		res.Summary = &r.Summary
		if _, serr := os.Stat(filepath.Join(r.Dir, report.HTMLFile)); serr == nil {
			res.Report = filepath.Join(r.Dir, report.HTMLFile)
		}
		if !c.jsonMode() {
			printSummary(c.stdout, r)
		}
	}
	code := outcomeCode(r.Summary.Outcome)
	if err != nil {
		res.Error = err.Error()
		code = exitCodeFor(err)
	}
	if r.Summary.Outcome != "" {
		for _, f := range after {
			if herr := f(r); herr != nil {
				c.fail(fmt.Errorf("history: %w", herr))
				if code == exitPass {
					code = exitConfig
				}
			}
		}
	}
	if c.jsonMode() {
		code = c.printJSON(res, code)
	}
	if err != nil {
		c.fail(err)
		if r.Dir != "" {
			fmt.Fprintf(c.stderr, "gaitrig %s: the run folder %s holds what was recorded\n", c.name, r.Dir)
		}
		return code
	}
	if !c.jsonMode() {
		fmt.Fprintln(c.stdout, "\n"+safetyCaution)
	}
	return code
}

func cmdDemo(args []string, stdout, stderr io.Writer) int {
	c := newCmdline("demo", "", `
The main job on the embedded default: the built-in reference firmware
connects over the embedded MQTT broker (loopback only) exactly as separate
controller code would, and walks the level-ground demo walker. Prints a line
per step, then the verdict and the path of the run folder with its report.`, stdout, stderr)
	out := c.String("out", "runs", "parent `FOLDER` for the run folder")
	scenario := c.String("scenario", "level-demo", "built-in `SCENARIO` or file to run instead of the level-ground demo")
	quiet := c.Bool("quiet", false, "no line per step")
	c.jsonFlag()
	if done, code := c.parse(args); done {
		return code
	}
	if c.NArg() != 0 {
		return c.usageError("takes no arguments, got %q", c.Args())
	}
	sc, err := resolveScenario(*scenario)
	if err != nil {
		return c.fail(err)
	}
	o := rig.Options{Link: "embedded", OutRoot: *out, Report: true, JUnit: true, Log: runLogger(stderr, c.jsonMode())}
	if !*quiet {
		o.OnStep = stepPrinter(c.progress())
	}
	return runAndReport(c, sc, o, nil)
}

package main

import (
	"context"
	"fmt"
	"io"
	"os"

	"gaitrig/hil"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

func init() {
	commands["run"] = command{"run a scenario against a board, a process or the built-in firmware", cmdRun}
	commands["demo"] = command{"the level-ground demo: built-in firmware over the embedded MQTT broker", cmdDemo}
}

// signalContext is cancelled by SIGINT or SIGTERM, so a run ends cleanly
// with outcome aborted and its folder complete. A second signal ends the
// process (interruptContext).
func signalContext() (context.Context, func()) { return interruptContext(os.Stderr) }

func cmdRun(args []string, stdout, stderr io.Writer) int {
	fs := newFlagSet("run", "SCENARIO", `
Runs one scenario (a YAML file, or the name of a built-in scenario) against
the controller its controller block names, or the one --link names. Writes a
run folder (manifest, telemetry, events, steps, summary) and, with --report,
an HTML report. SIGINT or SIGTERM ends the run with outcome "aborted" and
everything written.`, stderr)
	link := fs.String("link", "", rig.LinkHelp())
	out := fs.String("out", "runs", "parent folder for the run folder")
	dir := fs.String("dir", "", "exact run folder to create (overrides --out)")
	clock := fs.String("clock", "", `clock mode override: "lockstep" or "wallclock"`)
	rigID := fs.String("rig", "", "MQTT rig id override")
	rep := fs.Bool("report", true, "write report.html")
	junit := fs.Bool("junit", false, "write junit.xml, one test case per criterion")
	parquet := fs.Bool("parquet", false, "also export telemetry.parquet")
	quiet := fs.Bool("quiet", false, "no line per step")
	maxSteps := fs.Int("max-steps", 0, "end after this many steps (overrides the scenario's run.max_steps)")
	duration := fs.Float64("duration", 0, "end after this many simulated seconds (overrides run.duration_s)")
	if done, code := parseFlags(fs, args); done {
		return code
	}
	if *maxSteps < 0 || *duration < 0 {
		fmt.Fprintln(stderr, "gaitrig run: --max-steps and --duration must be ≥ 0")
		return exitConfig
	}
	if fs.NArg() != 1 {
		fmt.Fprintln(stderr, "gaitrig run: want exactly one SCENARIO (a file or a built-in name)")
		fs.Usage()
		return exitConfig
	}
	sc, err := resolveScenario(fs.Arg(0))
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig run:", err)
		return exitCodeFor(err)
	}
	o := rig.Options{Link: *link, OutRoot: *out, RunDir: *dir, Report: *rep, JUnit: *junit, Parquet: *parquet, Log: lineLogger(stderr), Rig: *rigID,
		MaxSteps: *maxSteps, Duration: *duration}
	if *link != "" {
		if _, err := rig.ParseLink(*link); err != nil {
			fmt.Fprintln(stderr, "gaitrig run:", err)
			return exitConfig
		}
	}
	if *clock != "" {
		if *clock != string(hil.Lockstep) && *clock != string(hil.Wallclock) {
			fmt.Fprintf(stderr, "gaitrig run: --clock %q: want lockstep or wallclock\n", *clock)
			return exitConfig
		}
		o.Clock = hil.ClockMode(*clock)
	}
	if !*quiet {
		o.OnStep = stepPrinter(stdout)
	}
	return runAndReport(sc, o, stdout, stderr, "run")
}

// runAndReport runs one scenario under a signal context and prints its
// verdict; it returns the exit code.
func runAndReport(sc *scenarios.Scenario, o rig.Options, stdout, stderr io.Writer, cmd string) int {
	ctx, stop := signalContext()
	defer stop()
	fmt.Fprintf(stdout, "scenario %s: %s\n", sc.Name, sc.Description)
	r, err := rig.Run(ctx, sc, o)
	if r.Dir != "" && r.Summary.Outcome != "" {
		printSummary(stdout, r)
	}
	if err != nil {
		fmt.Fprintf(stderr, "gaitrig %s: %v\n", cmd, err)
		if r.Dir != "" {
			fmt.Fprintf(stderr, "gaitrig %s: the run folder %s holds what was recorded\n", cmd, r.Dir)
		}
		return exitCodeFor(err)
	}
	fmt.Fprintln(stdout, "\n"+safetyCaution)
	return outcomeCode(r.Summary.Outcome)
}

func cmdDemo(args []string, stdout, stderr io.Writer) int {
	fs := newFlagSet("demo", "", `
The main job on the embedded default: the built-in reference firmware
connects over the embedded MQTT broker (loopback only) exactly as separate
controller code would, and walks the level-ground demo walker. Prints a line
per step, then the verdict and the path of the run folder with its report.`, stderr)
	out := fs.String("out", "runs", "parent folder for the run folder")
	scenario := fs.String("scenario", "level-demo", "built-in scenario or file to run instead of the level-ground demo")
	quiet := fs.Bool("quiet", false, "no line per step")
	if done, code := parseFlags(fs, args); done {
		return code
	}
	if fs.NArg() != 0 {
		fmt.Fprintln(stderr, "gaitrig demo: takes no arguments")
		return exitConfig
	}
	sc, err := resolveScenario(*scenario)
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig demo:", err)
		return exitCodeFor(err)
	}
	o := rig.Options{Link: "embedded", OutRoot: *out, Report: true, JUnit: true, Log: lineLogger(stderr)}
	if !*quiet {
		o.OnStep = stepPrinter(stdout)
	}
	return runAndReport(sc, o, stdout, stderr, "demo")
}

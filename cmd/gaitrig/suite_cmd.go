package main

import (
	"fmt"
	"io"
	"path/filepath"
	"runtime"
	"strings"

	"gaitrig/batch"
	"gaitrig/report"
	"gaitrig/rig"
)

func init() {
	commands["suite"] = command{"nightly rig: run a scenario library, compare with a baseline, write JUnit XML", cmdSuite}
}

func cmdSuite(args []string, stdout, stderr io.Writer) int {
	fs := newFlagSet("suite", "DIR|FILE|builtin ...", `
The nightly regression rig. Runs every scenario in the given folders (*.yaml),
files, or the whole built-in library ("builtin"), --jobs at once where the link
allows (in-process lockstep runs; wall-clock, serial and MQTT runs go one at a
time), compares each summary with the baseline, writes one JUnit XML test case
per scenario, and exits 1 on any regression or run that could not be carried
out. Output and results are the same whatever --jobs is. --shard K/N runs only
every N-th scenario starting at the K-th, so a CI matrix can split the library
across machines. The baseline defaults to baseline.json in the first folder
given, when it exists; without a baseline every scenario must pass its own
criteria.`, stderr)
	basePath := fs.String("baseline", "", "baseline file (JSON) to compare with")
	writeBase := fs.String("write-baseline", "", "write this run's figures as a new baseline file (with default tolerances)")
	junit := fs.String("junit", "", "JUnit XML output file (default OUT/suite-TIME/junit.xml)")
	out := fs.String("out", "runs", "parent folder for the suite's run folders")
	shardFlag := fs.String("shard", "", "K/N: run the K-th of N slices of the scenario list")
	jobs := fs.Int("jobs", runtime.NumCPU(), "scenarios run at once (in-process lockstep runs; the others run one at a time)")
	fs.IntVar(jobs, "parallel", runtime.NumCPU(), "old name of --jobs")
	link := fs.String("link", "", "run every scenario against this link instead of the scenario's ("+"see gaitrig run --help)")
	noReport := fs.Bool("no-report", false, "skip the HTML report of each run")
	if done, code := parseFlags(fs, args); done {
		return code
	}
	if fs.NArg() == 0 {
		fmt.Fprintln(stderr, "gaitrig suite: want at least one DIR, FILE or builtin")
		fs.Usage()
		return exitConfig
	}
	sh, err := batch.ParseShard(*shardFlag)
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig suite:", err)
		return exitConfig
	}
	if *link != "" {
		if _, err := rig.ParseLink(*link); err != nil {
			fmt.Fprintln(stderr, "gaitrig suite:", err)
			return exitConfig
		}
	}
	sources, err := batch.Sources(fs.Args())
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig suite:", err)
		return exitConfig
	}
	picked := batch.Pick(sh, sources)
	if len(picked) == 0 {
		fmt.Fprintf(stderr, "gaitrig suite: shard %d/%d of %d scenarios is empty\n", sh.K, sh.N, len(sources))
		return exitConfig
	}
	// Load everything first: a bad scenario file is a configuration error
	// of the suite, reported before any run starts.
	scs, errs := batch.Load(picked)
	for _, err := range errs {
		fmt.Fprintf(stderr, "gaitrig suite: %v\n", err)
	}
	if len(errs) > 0 {
		return exitConfig
	}
	if *basePath == "" {
		*basePath = batch.DefaultBaselinePath(fs.Args())
	}
	var bl *batch.Baseline
	if *basePath != "" {
		if bl, err = batch.ReadBaseline(*basePath); err != nil {
			fmt.Fprintln(stderr, "gaitrig suite:", err)
			return exitConfig
		}
	}
	suiteDir, err := batch.NewDir(*out, "suite")
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig suite:", err)
		return exitConfig
	}
	fmt.Fprintf(stdout, "suite: %d scenarios (shard %d/%d of %d), run folders in %s\n", len(scs), sh.K, sh.N, len(sources), suiteDir)

	ctx, stop := signalContext()
	defer stop()
	res := batch.Suite{Dir: suiteDir, Link: *link, Report: !*noReport, Jobs: *jobs, Baseline: bl, OnDone: progressLine(stdout)}.Run(ctx, scs)

	fmt.Fprintln(stdout)
	for _, r := range res.Results {
		switch {
		case r.Err != nil:
			fmt.Fprintf(stdout, "ERROR  %-22s %v\n", r.Scenario, r.Err)
		case len(r.Regressions) > 0:
			fmt.Fprintf(stdout, "REGRESSED %-19s %s\n", r.Scenario, strings.Join(r.Regressions, "; "))
		default:
			fmt.Fprintf(stdout, "ok     %-22s %s\n", r.Scenario, r.Outcome)
		}
	}
	junitPath := *junit
	if junitPath == "" {
		junitPath = filepath.Join(suiteDir, report.JUnitFile)
	}
	if err := batch.WriteJUnit(junitPath, "gaitrig suite", res.Results); err != nil {
		fmt.Fprintln(stderr, "gaitrig suite:", err)
		return exitConfig
	}
	fmt.Fprintf(stdout, "\nJUnit XML: %s\n", junitPath)
	if *writeBase != "" {
		tol := batch.DefaultTolerances
		if bl != nil {
			tol = bl.Tolerances
		}
		if err := batch.WriteBaseline(*writeBase, tol, res.Entries); err != nil {
			fmt.Fprintln(stderr, "gaitrig suite:", err)
			return exitConfig
		}
		fmt.Fprintf(stdout, "baseline written: %s\n", *writeBase)
	}
	fmt.Fprintf(stdout, "%d of %d scenarios regressed or could not run\n\n%s\n", res.Failed, len(scs), safetyCaution)
	if res.Failed > 0 {
		return exitFail
	}
	return exitPass
}

// progressLine prints a line per finished run of a suite or preflight.
func progressLine(w io.Writer) func(int, batch.Done) {
	return func(_ int, d batch.Done) {
		name := d.Job.Scenario.Name
		if d.Err != nil {
			fmt.Fprintf(w, "  %-22s could not run: %v\n", name, d.Err)
			return
		}
		s := d.Result.Summary
		fmt.Fprintf(w, "  %-22s %-8s steps %3d  %.1f s\n", name, s.Outcome, s.Steps, d.Seconds)
	}
}

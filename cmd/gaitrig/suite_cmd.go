package main

import (
	"fmt"
	"io"
	"path/filepath"
	"runtime"
	"strings"

	"gaitrig/batch"
	"gaitrig/record"
	"gaitrig/report"
	"gaitrig/rig"
)

func init() {
	commands["suite"] = command{"nightly rig: run a scenario library, compare with a baseline, write JUnit XML", cmdSuite}
	jsonResults["suite"] = suiteResult{}
}

// suiteResult is what suite prints with --json.
type suiteResult struct {
	SuiteFolder     string          `json:"suite_folder"`               // the folder holding every run folder
	Shard           string          `json:"shard"`                      // K/N
	Baseline        string          `json:"baseline,omitempty"`         // the baseline compared with
	JUnit           string          `json:"junit"`                      // the JUnit XML file written
	BaselineWritten string          `json:"baseline_written,omitempty"` // --write-baseline, when given
	Scenarios       []suiteScenario `json:"scenarios"`                  // sorted by name
	Failed          int             `json:"failed"`                     // scenarios that regressed or could not run
	Caution         string          `json:"caution"`                    // the safety caution
}

// suiteScenario is one scenario's verdict in a suite.
type suiteScenario struct {
	Scenario    string   `json:"scenario"`        // scenario name
	Verdict     string   `json:"verdict"`         // ok, regressed or error
	Outcome     string   `json:"outcome"`         // the run's outcome
	Expected    string   `json:"expected"`        // the outcome the baseline expects ("" = pass)
	Regressions []string `json:"regressions"`     // what got worse than the baseline, in words
	Error       string   `json:"error,omitempty"` // why it could not run
	RunFolder   string   `json:"run_folder"`      // the scenario's run folder
	Seconds     float64  `json:"seconds"`         // wall time
}

func cmdSuite(args []string, stdout, stderr io.Writer) int {
	c := newCmdline("suite", "DIR|FILE|builtin ...", `
The nightly regression rig. Runs every scenario in the given folders (*.yaml),
files, or the whole built-in library ("builtin"), --jobs at once where the link
allows (in-process lockstep runs; wall-clock, serial and MQTT runs go one at a
time), compares each summary with the baseline, writes one JUnit XML test case
per scenario, and exits 1 on any regression or run that could not be carried
out. Output and results are the same whatever --jobs is. --shard K/N runs only
every N-th scenario starting at the K-th, so a CI matrix can split the library
across machines. The baseline defaults to baseline.json in the first folder
given, when it exists; without a baseline every scenario must pass its own
criteria.`, stdout, stderr)
	basePath := c.String("baseline", "", "baseline `FILE` (JSON) to compare with")
	writeBase := c.String("write-baseline", "", "write this run's figures as a new baseline `FILE` (with default tolerances)")
	junitFile := c.String("junit-file", "", "write the suite's JUnit XML to `FILE` (default: junit.xml in the suite's folder)")
	c.StringVar(junitFile, "junit", "", "")
	c.deprecate("junit", "--junit PATH is now --junit-file PATH (--junit alone means \"write junit.xml\" in run and report; a suite always writes it)")
	out := c.String("out", "runs", "parent `FOLDER` for the suite's run folders")
	shardFlag := c.String("shard", "", "run the K-th of N slices of the scenario list (`K/N`)")
	jobs := c.Int("jobs", runtime.NumCPU(), "`N` scenarios run at once (in-process lockstep runs; the others run one at a time)")
	c.IntVar(jobs, "parallel", runtime.NumCPU(), "")
	c.deprecate("parallel", "use --jobs")
	c.defaultIs("jobs", "every core")
	link := c.String("link", "", "run every scenario against this `LINK` instead of the scenario's (syntax as in gaitrig run --help)")
	noReport := c.Bool("no-report", false, "do not write the HTML report of each run")
	c.jsonFlag()
	if done, code := c.parse(args); done {
		return code
	}
	if c.NArg() == 0 {
		return c.usageError("want at least one DIR, FILE or builtin")
	}
	sh, err := batch.ParseShard(*shardFlag)
	if err != nil {
		return c.usageError("%v", err)
	}
	if *link != "" {
		if _, err := rig.ParseLink(*link); err != nil {
			return c.usageError("%v", err)
		}
	}
	sources, err := batch.Sources(c.Args())
	if err != nil {
		return c.fail(rig.ConfigError(err))
	}
	picked := batch.Pick(sh, sources)
	if len(picked) == 0 {
		return c.usageError("shard %d/%d of %d scenarios is empty", sh.K, sh.N, len(sources))
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
		*basePath = batch.DefaultBaselinePath(c.Args())
	}
	var bl *batch.Baseline
	if *basePath != "" {
		if bl, err = batch.ReadBaseline(*basePath); err != nil {
			return c.fail(rig.ConfigError(err))
		}
	}
	suiteDir, err := batch.NewDir(*out, "suite")
	if err != nil {
		return c.fail(rig.ConfigError(err))
	}
	w := c.progress()
	fmt.Fprintf(w, "suite: %d scenarios (shard %d/%d of %d), run folders in %s\n", len(scs), sh.K, sh.N, len(sources), suiteDir)
	width := 0
	for _, s := range scs {
		width = max(width, len(s.Name))
	}

	ctx, stop := signalContext()
	defer stop()
	res := batch.Suite{Dir: suiteDir, Link: *link, Report: !*noReport, Jobs: *jobs, Baseline: bl, OnDone: progressLine(w, width)}.Run(ctx, scs)

	folders := map[string]string{}
	for _, d := range res.Runs {
		folders[d.Job.Scenario.Name] = d.Result.Dir
	}
	js := suiteResult{SuiteFolder: suiteDir, Shard: fmt.Sprintf("%d/%d", sh.K, sh.N), Baseline: *basePath,
		Failed: res.Failed, Caution: record.Caution, Scenarios: []suiteScenario{}}
	fmt.Fprintln(w)
	verdictWidth := len("REGRESSED")
	for _, r := range res.Results {
		s := suiteScenario{Scenario: r.Scenario, Outcome: r.Outcome, Expected: r.Expected, Regressions: r.Regressions,
			RunFolder: folders[r.Scenario], Seconds: r.Seconds}
		switch {
		case r.Err != nil:
			s.Verdict, s.Error = "error", r.Err.Error()
			fmt.Fprintf(w, "%-*s  %-*s  %v\n", verdictWidth, "ERROR", width, r.Scenario, r.Err)
		case len(r.Regressions) > 0:
			s.Verdict = "regressed"
			fmt.Fprintf(w, "%-*s  %-*s  %s\n", verdictWidth, "REGRESSED", width, r.Scenario, strings.Join(r.Regressions, "; "))
		default:
			s.Verdict = "ok"
			fmt.Fprintf(w, "%-*s  %-*s  %s\n", verdictWidth, "ok", width, r.Scenario, r.Outcome)
		}
		js.Scenarios = append(js.Scenarios, s)
	}
	js.JUnit = *junitFile
	if js.JUnit == "" {
		js.JUnit = filepath.Join(suiteDir, report.JUnitFile)
	}
	if err := batch.WriteJUnit(js.JUnit, "gaitrig suite", res.Results); err != nil {
		return c.fail(rig.ConfigError(err))
	}
	fmt.Fprintf(w, "\nJUnit XML: %s\n", js.JUnit)
	if *writeBase != "" {
		tol := batch.DefaultTolerances
		if bl != nil {
			tol = bl.Tolerances
		}
		if err := batch.WriteBaseline(*writeBase, tol, res.Entries); err != nil {
			return c.fail(rig.ConfigError(err))
		}
		js.BaselineWritten = *writeBase
		fmt.Fprintf(w, "baseline written: %s\n", *writeBase)
	}
	code := exitPass
	if res.Failed > 0 {
		code = exitFail
	}
	if c.jsonMode() {
		return c.printJSON(js, code)
	}
	fmt.Fprintf(w, "%d of %d scenarios regressed or could not run\n\n%s\n", res.Failed, len(scs), safetyCaution)
	return code
}

// progressLine prints a line per finished run of a suite or preflight,
// names padded to width so the columns line up.
func progressLine(w io.Writer, width int) func(int, batch.Done) {
	return func(_ int, d batch.Done) {
		name := d.Job.Scenario.Name
		if d.Err != nil {
			fmt.Fprintf(w, "  %-*s  could not run: %v\n", width, name, d.Err)
			return
		}
		s := d.Result.Summary
		fmt.Fprintf(w, "  %-*s  %-8s steps %3d  %.1f s\n", width, name, s.Outcome, s.Steps, d.Seconds)
	}
}

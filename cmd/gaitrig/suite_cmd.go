package main

import (
	"context"
	"fmt"
	"io"
	"os"
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
	SuiteFolder     string                  `json:"suite_folder"`               // the folder holding every run folder
	Shard           string                  `json:"shard"`                      // K/N
	Baseline        string                  `json:"baseline,omitempty"`         // the baseline compared with
	JUnit           string                  `json:"junit"`                      // the JUnit XML file written
	BaselineWritten string                  `json:"baseline_written,omitempty"` // --write-baseline, when given
	Summary         string                  `json:"summary"`                    // the suite's summary file (suite.json), what merge reads
	Page            string                  `json:"page"`                       // the suite's HTML page
	Scenarios       []batch.ScenarioVerdict `json:"scenarios"`                  // sorted by name
	Failed          int                     `json:"failed"`                     // scenarios that regressed or could not run (not quarantined)
	Infrastructure  int                     `json:"infrastructure"`             // scenarios the host spoiled on every attempt
	Quarantined     int                     `json:"quarantined"`                // quarantined scenarios that did not pass
	Caution         string                  `json:"caution"`                    // the safety caution
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
criteria.

Each suite folder gets suite.json (verdicts and figures), suite.html and
junit.xml; gaitrig merge combines the folders of the shards of one suite into
the result an unsharded run gives. Without --shard, a Kubernetes Indexed Job's
JOB_COMPLETION_INDEX (0-based) picks the shard, with the count from
--shard-count or GAITRIG_SHARD_COUNT. A run the host spoiled (outcome invalid,
or a link that could not be opened) is made again up to --retries times and,
if it never succeeds, reported as infrastructure: a JUnit error, not a failure.
A suite.yaml in the first folder given may quarantine scenarios
("quarantine: [NAME, ...]"): they run and are reported (JUnit: skipped) but do
not fail the suite. Exit codes: 0 all well, 1 a regression or a run that could
not be made, 2 bad usage or configuration, 3 no regression but host trouble
on some scenario (run the night again).`, stdout, stderr)
	basePath := c.String("baseline", "", "baseline `FILE` (JSON) to compare with")
	writeBase := c.String("write-baseline", "", "write this run's figures as a new baseline `FILE` (with default tolerances)")
	junitFile := c.String("junit-file", "", "write the suite's JUnit XML to `FILE` (default: junit.xml in the suite's folder)")
	c.StringVar(junitFile, "junit", "", "")
	c.deprecate("junit", "--junit PATH is now --junit-file PATH (--junit alone means \"write junit.xml\" in run and report; a suite always writes it)")
	out := c.String("out", "runs", "parent `FOLDER` for the suite's run folders")
	shardFlag := c.String("shard", "", "run the K-th of N slices of the scenario list (`K/N`)")
	shardCount := c.Int("shard-count", 0, "`N` shards in all, the shard taken from JOB_COMPLETION_INDEX (default: GAITRIG_SHARD_COUNT)")
	retries := c.Int("retries", 2, "make a run the host spoiled again up to `N` times")
	jobs := c.Int("jobs", runtime.NumCPU(), "`N` scenarios run at once (in-process lockstep runs; the others run one at a time)")
	c.IntVar(jobs, "parallel", runtime.NumCPU(), "")
	c.deprecate("parallel", "use --jobs")
	c.defaultIs("jobs", "every core")
	link := c.String("link", "", "run every scenario against this `LINK` instead of the scenario's (syntax as in gaitrig run --help)")
	noReport := c.Bool("no-report", false, "do not write the HTML report of each run")
	hist := addHistoryFlags(c)
	c.jsonFlag()
	if done, code := c.parse(args); done {
		return code
	}
	if c.NArg() == 0 {
		return c.usageError("want at least one DIR, FILE or builtin")
	}
	sh, err := batch.ShardFrom(*shardFlag, *shardCount, os.Getenv)
	if err != nil {
		return c.usageError("%v", err)
	}
	if *retries < 0 {
		return c.usageError("--retries %d: want 0 or more", *retries)
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
	var quarantine map[string]bool
	if st, err := os.Stat(c.Arg(0)); err == nil && st.IsDir() {
		// The names of the whole list, not just this shard's: every
		// shard reads the same file and must accept it alike.
		all, errs := batch.Load(sources)
		if len(errs) > 0 {
			return c.fail(errs[0])
		}
		names := make([]string, len(all))
		for i, s := range all {
			names[i] = s.Name
		}
		cfg, err := batch.ReadSuiteConfig(c.Arg(0), names)
		if err != nil {
			return c.fail(err)
		}
		quarantine = cfg.Quarantine
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
	st, err := hist.open(context.Background())
	if err != nil {
		return c.fail(err)
	}
	if st != nil {
		defer st.Close()
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
	res := batch.Suite{Dir: suiteDir, Link: *link, Report: !*noReport, Jobs: *jobs, Baseline: bl, OnDone: progressLine(w, width),
		Retries: *retries, Quarantine: quarantine}.Run(ctx, scs)
	sum, err := batch.SummaryOf(res, sh, len(sources), *basePath, bl)
	if err != nil {
		return c.fail(err)
	}
	for i := range sum.Scenarios {
		// Relative to the suite folder, so the folder can be moved (a CI
		// artifact) and still be merged.
		if r, err := filepath.Rel(suiteDir, sum.Scenarios[i].RunFolder); err == nil && sum.Scenarios[i].RunFolder != "" {
			sum.Scenarios[i].RunFolder = r
		}
	}
	js := suiteResult{SuiteFolder: suiteDir, Shard: sh.String(), Baseline: *basePath}
	code, err := writeSuiteResult(c, suiteDir, *junitFile, *writeBase, sum, &js)
	if err != nil {
		return c.fail(rig.ConfigError(err))
	}
	if st != nil {
		// Every run that ended with an outcome, host trouble included
		// (the trend leaves invalid runs out, the history keeps them).
		for _, d := range res.Runs {
			if d.Err != nil || d.Result.Summary.Outcome == "" {
				continue
			}
			if err := hist.store(st, "suite", d.Job.Scenario)(d.Result); err != nil {
				c.fail(fmt.Errorf("history: %w", err))
				if code == exitPass {
					code = exitConfig
				}
				break
			}
		}
	}
	return code
}

// writeSuiteResult writes a suite's (or a merge's) summary, page, JUnit
// file and, when asked, new baseline into dir, prints the verdicts, and
// returns the exit code: 1 on a regression or a run that could not be made,
// else 3 when the host spoiled some scenario, else 0. js has the caller's
// fields set; the rest are filled in here.
func writeSuiteResult(c *cmdline, dir, junitFile, writeBase string, sum batch.SuiteSummary, js *suiteResult) (int, error) {
	w := c.progress()
	width := 0
	for _, v := range sum.Scenarios {
		width = max(width, len(v.Scenario))
	}
	fmt.Fprintln(w)
	verdictWidth := len("INFRASTRUCTURE")
	for _, v := range sum.Scenarios {
		word, what := strings.ToUpper(v.Verdict), v.Outcome
		switch v.Verdict {
		case batch.VerdictOK:
			word = "ok"
		case batch.VerdictRegressed:
			what = strings.Join(v.Regressions, "; ")
		default:
			what = v.Error
		}
		if v.Quarantined {
			what += " (quarantined: does not fail the suite)"
		}
		fmt.Fprintf(w, "%-*s  %-*s  %s\n", verdictWidth, word, width, v.Scenario, what)
	}
	if err := batch.WriteSuiteSummary(dir, sum); err != nil {
		return 0, err
	}
	if err := batch.WriteSuitePage(dir, sum); err != nil {
		return 0, err
	}
	js.Summary, js.Page = filepath.Join(dir, batch.SuiteSummaryFile), filepath.Join(dir, batch.SuitePageFile)
	js.JUnit = junitFile
	if js.JUnit == "" {
		js.JUnit = filepath.Join(dir, report.JUnitFile)
	}
	if err := batch.WriteSuiteJUnit(js.JUnit, "gaitrig suite", sum); err != nil {
		return 0, err
	}
	fmt.Fprintf(w, "\nJUnit XML: %s\nsummary:   %s\npage:      %s\n", js.JUnit, js.Summary, js.Page)
	if writeBase != "" {
		tol := batch.DefaultTolerances
		if sum.Tolerances != nil {
			tol = *sum.Tolerances
		}
		if err := batch.WriteBaseline(writeBase, tol, sum.Entries()); err != nil {
			return 0, err
		}
		js.BaselineWritten = writeBase
		fmt.Fprintf(w, "baseline written: %s\n", writeBase)
	}
	// What --json prints names run folders from where the command ran.
	js.Scenarios = append([]batch.ScenarioVerdict(nil), sum.Scenarios...)
	for i, v := range js.Scenarios {
		if v.RunFolder != "" && !filepath.IsAbs(v.RunFolder) {
			js.Scenarios[i].RunFolder = filepath.Join(dir, v.RunFolder)
		}
	}
	js.Failed, js.Infrastructure, js.Quarantined, js.Caution = sum.Failed, sum.Infrastructure, sum.Quarantined, record.Caution
	code := exitPass
	switch {
	case sum.Failed > 0:
		code = exitFail
	case sum.Infrastructure > 0:
		code = exitInvalid
	}
	if c.jsonMode() {
		return c.printJSON(*js, code), nil
	}
	fmt.Fprintf(w, "%d of %d scenarios regressed or could not run, %d spoiled by the host, %d quarantined and not passing\n\n%s\n",
		sum.Failed, len(sum.Scenarios), sum.Infrastructure, sum.Quarantined, safetyCaution)
	return code, nil
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

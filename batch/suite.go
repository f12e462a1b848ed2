package batch

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"time"

	"gaitrig/record"
	"gaitrig/report"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// Suite runs a list of scenarios, each into its own run folder, and judges
// each result: against its baseline entry when there is a baseline,
// against the scenario's own criteria (outcome pass) when there is none.
// Set Dir; the other settings have working defaults.
type Suite struct {
	// Dir is the folder the run folders go in, one per scenario, named
	// after it. Required.
	Dir string
	// Link overrides every scenario's link ("" keeps each scenario's), in
	// --link syntax.
	Link string
	// Report writes each run's HTML report. Default false.
	Report bool
	// Jobs is how many runs go at once (see Scheduler). Default 1.
	Jobs int
	// Baseline is what results are compared with; nil means every
	// scenario must pass its own criteria.
	Baseline *Baseline
	// Runner runs one scenario. Default rig.Run.
	Runner RunFunc
	// OnDone is called once per scenario as it finishes, in the order of
	// the scenarios (see Scheduler.OnDone), and again for each retry.
	// Default none.
	OnDone func(i int, d Done)
	// Retries is how many more times a run spoiled by the host (see
	// HostTrouble) is made before it is reported as infrastructure.
	// Default 0; the command line's default is 2.
	Retries int
	// Quarantine names scenarios that run and are reported but do not
	// count as failed (see SuiteConfig). Default none.
	Quarantine map[string]bool
}

// SuiteResult is what a suite gives back.
type SuiteResult struct {
	// Runs holds every run, in the order of the scenarios given.
	Runs []Done
	// Results holds the verdict per scenario, sorted by name, as the JUnit
	// file lists them.
	Results []report.ScenarioResult
	// Entries holds the figures of every scenario that ran, by name: a new
	// baseline (WriteBaseline).
	Entries map[string]Entry
	// Failed counts the scenarios that regressed or could not run, not
	// counting infrastructure trouble and quarantined scenarios.
	Failed int
	// Verdicts holds the verdict and figures per scenario, sorted by name:
	// what the suite's summary (suite.json) and page list.
	Verdicts []ScenarioVerdict
	// Infrastructure counts the scenarios whose every attempt the host
	// spoiled (HostTrouble): they say nothing about the build.
	Infrastructure int
	// Quarantined counts the quarantined scenarios that regressed or could
	// not run: reported, not failed.
	Quarantined int
}

// Run runs every scenario and judges it. A scenario that cannot run counts
// as failed; the others still run.
func (s Suite) Run(ctx context.Context, scs []*scenarios.Scenario) SuiteResult {
	jobs := make([]Job, len(scs))
	for i, sc := range scs {
		jobs[i] = Job{Scenario: sc, Options: rig.Options{Link: s.Link, RunDir: filepath.Join(s.Dir, sc.Name), Report: s.Report}}
	}
	runs := Scheduler{Jobs: s.Jobs, Runner: s.Runner, OnDone: s.OnDone}.RunAll(ctx, jobs)
	attempts := s.retry(ctx, jobs, runs)
	out := SuiteResult{Runs: runs, Entries: map[string]Entry{}}
	for i, d := range runs {
		name := d.Job.Scenario.Name
		r := report.ScenarioResult{Scenario: name, Seconds: d.Seconds, Err: d.Err}
		v := ScenarioVerdict{Scenario: name, RunFolder: d.Result.Dir, Seconds: d.Seconds, Attempts: attempts[i], Quarantined: s.Quarantine[name]}
		switch {
		case HostTrouble(d):
			why := "outcome invalid"
			if d.Err != nil {
				why = d.Err.Error()
			} else if d.Result.Summary.Reason != "" {
				why += " (" + d.Result.Summary.Reason + ")"
			}
			r.Err = fmt.Errorf("infrastructure, not the firmware: %s, on each of %d attempts", why, attempts[i])
			v.Verdict, v.Error = VerdictInfrastructure, r.Err.Error()
		case d.Err != nil:
			v.Verdict, v.Error = VerdictError, d.Err.Error()
		default:
			got := EntryOf(d.Result.Summary)
			out.Entries[name] = got
			r.Outcome = got.Outcome
			r.Expected, r.Regressions = Judge(s.Baseline, name, d.Result.Summary)
			v.Figures, v.Reason = &got, d.Result.Summary.Reason
			v.Verdict, v.Outcome, v.Expected, v.Regressions = VerdictOK, r.Outcome, r.Expected, r.Regressions
			if len(r.Regressions) > 0 {
				v.Verdict = VerdictRegressed
			}
		}
		out.Results = append(out.Results, r)
		out.Verdicts = append(out.Verdicts, v)
	}
	sort.SliceStable(out.Results, func(i, j int) bool { return out.Results[i].Scenario < out.Results[j].Scenario })
	sort.SliceStable(out.Verdicts, func(i, j int) bool { return out.Verdicts[i].Scenario < out.Verdicts[j].Scenario })
	out.Failed, out.Infrastructure, out.Quarantined = count(out.Verdicts)
	return out
}

// Judge says what is wrong with a run of the scenario named name: with a
// baseline, what regressed against its entry (a scenario without an entry
// is a regression, so a new scenario cannot pass unseen); without one, an
// outcome other than pass. expected is the baseline's outcome ("" without
// an entry).
func Judge(bl *Baseline, name string, s record.Summary) (expected string, regressions []string) {
	return JudgeEntry(bl, name, EntryOf(s), s.Reason)
}

// JudgeEntry is Judge on a run's figures (reason is the summary's reason
// for its outcome, quoted when there is no baseline): what merge uses to
// judge shards against one baseline.
func JudgeEntry(bl *Baseline, name string, got Entry, reason string) (expected string, regressions []string) {
	if bl == nil {
		if got.Outcome != string(record.Pass) {
			return "", []string{fmt.Sprintf("outcome %s (%s)", got.Outcome, reason)}
		}
		return "", nil
	}
	want, ok := bl.Scenarios[name]
	if !ok {
		return "", []string{"no baseline entry for this scenario"}
	}
	return want.Outcome, Compare(want, got, bl.Tolerances)
}

// Sources expands suite arguments into the list of scenario sources, in a
// stable order: "builtin" is every built-in scenario (builtin:NAME), a
// folder is its *.yaml and *.yml files sorted by name (but suite.yaml, the
// suite's configuration), anything else a file. A missing path or a folder without scenario files wraps
// rig.ErrConfig.
func Sources(args []string) ([]string, error) {
	var out []string
	for _, a := range args {
		if a == "builtin" {
			for _, e := range scenarios.Library() {
				out = append(out, scenarios.BuiltinPrefix+e.Name)
			}
			continue
		}
		st, err := os.Stat(a)
		if err != nil {
			return nil, rig.Configf("%s: %v", a, err)
		}
		if !st.IsDir() {
			out = append(out, a)
			continue
		}
		var files []string
		for _, pat := range []string{"*.yaml", "*.yml"} {
			m, _ := filepath.Glob(filepath.Join(a, pat))
			for _, f := range m {
				// The suite's configuration sits beside the scenarios
				// and is not one of them.
				if filepath.Base(f) != SuiteConfigFile {
					files = append(files, f)
				}
			}
		}
		if len(files) == 0 {
			return nil, rig.Configf("%s: no *.yaml scenario files in this folder", a)
		}
		sort.Strings(files)
		out = append(out, files...)
	}
	return out, nil
}

// Load loads every source (file path or built-in name). It returns the
// scenarios in order and one error per source that does not load (each
// wrapping rig.ErrConfig), so a person sees every bad file at once. Two
// scenarios with the same name are an error too: a suite keeps run
// folders and baseline entries by name, and one would overwrite the other.
func Load(sources []string) ([]*scenarios.Scenario, []error) {
	out := make([]*scenarios.Scenario, len(sources))
	var errs []error
	first := map[string]string{} // scenario name → source that has it
	for i, src := range sources {
		sc, err := scenarios.Resolve(src)
		if err != nil {
			errs = append(errs, rig.ConfigError(err))
			continue
		}
		if other, dup := first[sc.Name]; dup {
			errs = append(errs, rig.Configf("%s: scenario name %s is also the name of %s; a suite keeps run folders and baseline entries by name", src, sc.Name, other))
			continue
		}
		first[sc.Name] = src
		out[i] = sc
	}
	return out, errs
}

// DefaultBaselinePath is the baseline a suite uses when none is named:
// baseline.json in the folder args[0], when args[0] is a folder and the
// file exists; "" otherwise.
func DefaultBaselinePath(args []string) string {
	if len(args) == 0 {
		return ""
	}
	if st, err := os.Stat(args[0]); err == nil && st.IsDir() {
		p := filepath.Join(args[0], "baseline.json")
		if _, err := os.Stat(p); err == nil {
			return p
		}
	}
	return ""
}

// NewDir creates a new folder root/<kind>-<UTC time> (root "" means
// "runs") for the run folders of one batch and returns its path. When that
// exists (two batches started in the same second), it appends -2, -3, …:
// the run folders of one batch must never land in another's, where they
// could not be created.
func NewDir(root, kind string) (string, error) {
	if root == "" {
		root = "runs"
	}
	if err := os.MkdirAll(root, 0o755); err != nil {
		return "", err
	}
	base := filepath.Join(root, kind+"-"+time.Now().UTC().Format("20060102-150405"))
	dir := base
	// os.Mkdir fails on an existing folder, so two processes racing for
	// one name cannot both get it. The bound only stops a runaway loop.
	for i := 2; i < 10000; i++ {
		err := os.Mkdir(dir, 0o755)
		if err == nil {
			return dir, nil
		}
		if !os.IsExist(err) {
			return "", err
		}
		dir = fmt.Sprintf("%s-%d", base, i)
	}
	return "", fmt.Errorf("%s: too many folders of that name", base)
}

// WriteJUnit writes results as a JUnit XML file at path (one test case per
// scenario, see report.ScenarioSuite), creating its folder.
func WriteJUnit(path, name string, results []report.ScenarioResult) error {
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		return err
	}
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	if err := report.WriteJUnit(f, report.ScenarioSuite(name, results)); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

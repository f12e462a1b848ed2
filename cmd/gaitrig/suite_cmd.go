package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"sort"
	"strings"
	"sync"
	"time"

	"gaitrig/record"
	"gaitrig/report"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

func init() {
	commands["suite"] = command{"nightly rig: run a scenario library, compare with a baseline, write JUnit XML", cmdSuite}
}

// suiteItem is one scenario of a suite and what became of it.
type suiteItem struct {
	Source   string // file path or builtin:name
	Scenario *scenarios.Scenario
	Result   rig.Result
	Err      error
	Seconds  float64
}

func cmdSuite(args []string, stdout, stderr io.Writer) int {
	fs := newFlagSet("suite", "DIR|FILE|builtin ...", `
The nightly regression rig. Runs every scenario in the given folders (*.yaml),
files, or the whole built-in library ("builtin"), in parallel where the link
allows (in-process lockstep runs; wall-clock, serial and MQTT runs go one at a
time), compares each summary with the baseline, writes one JUnit XML test case
per scenario, and exits 1 on any regression or run that could not be carried
out. --shard K/N runs only every N-th scenario starting at the K-th, so a CI
matrix can split the library across machines. The baseline defaults to
baseline.json in the first folder given, when it exists; without a baseline
every scenario must pass its own criteria.`, stderr)
	basePath := fs.String("baseline", "", "baseline file (JSON) to compare with")
	writeBase := fs.String("write-baseline", "", "write this run's figures as a new baseline file (with default tolerances)")
	junit := fs.String("junit", "", "JUnit XML output file (default OUT/suite-TIME/junit.xml)")
	out := fs.String("out", "runs", "parent folder for the suite's run folders")
	shardFlag := fs.String("shard", "", "K/N: run the K-th of N slices of the scenario list")
	parallel := fs.Int("parallel", runtime.NumCPU(), "in-process lockstep scenarios run at once")
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
	sh, err := parseShard(*shardFlag)
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig suite:", err)
		return exitConfig
	}
	linkOverride := *link
	if *link != "" {
		if _, err := rig.ParseLink(*link); err != nil {
			fmt.Fprintln(stderr, "gaitrig suite:", err)
			return exitConfig
		}
	}
	sources, err := collectScenarios(fs.Args())
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig suite:", err)
		return exitConfig
	}
	var items []*suiteItem
	for i, src := range sources {
		if sh.pick(i) {
			items = append(items, &suiteItem{Source: src})
		}
	}
	if len(items) == 0 {
		fmt.Fprintf(stderr, "gaitrig suite: shard %d/%d of %d scenarios is empty\n", sh.K, sh.N, len(sources))
		return exitConfig
	}
	// Load everything first: a bad scenario file is a configuration error
	// of the suite, reported before any run starts.
	bad := 0
	for _, it := range items {
		if it.Scenario, err = resolveScenario(it.Source); err != nil {
			fmt.Fprintf(stderr, "gaitrig suite: %v\n", err)
			bad++
		}
	}
	if bad > 0 {
		return exitConfig
	}
	var bl *baseline
	if *basePath == "" {
		if st, err := os.Stat(fs.Arg(0)); err == nil && st.IsDir() {
			if p := filepath.Join(fs.Arg(0), "baseline.json"); fileExists(p) {
				*basePath = p
			}
		}
	}
	if *basePath != "" {
		if bl, err = readBaseline(*basePath); err != nil {
			fmt.Fprintln(stderr, "gaitrig suite:", err)
			return exitConfig
		}
	}

	suiteDir := filepath.Join(*out, "suite-"+time.Now().UTC().Format("20060102-150405"))
	if err := os.MkdirAll(suiteDir, 0o755); err != nil {
		fmt.Fprintln(stderr, "gaitrig suite:", err)
		return exitConfig
	}
	fmt.Fprintf(stdout, "suite: %d scenarios (shard %d/%d of %d), run folders in %s\n", len(items), sh.K, sh.N, len(sources), suiteDir)

	ctx, stop := signalContext()
	defer stop()
	runSuite(ctx, items, suiteDir, linkOverride, !*noReport, *parallel, stdout)

	// Compare and report.
	var results []report.ScenarioResult
	entries := map[string]baselineEntry{}
	failed := 0
	for _, it := range items {
		r := report.ScenarioResult{Scenario: it.Scenario.Name, Seconds: it.Seconds, Err: it.Err}
		if it.Err == nil {
			got := entryOf(it.Result.Summary)
			entries[it.Scenario.Name] = got
			r.Outcome = got.Outcome
			if bl != nil {
				want, ok := bl.Scenarios[it.Scenario.Name]
				if !ok {
					r.Regressions = append(r.Regressions, "no baseline entry for this scenario")
				} else {
					r.Expected = want.Outcome
					r.Regressions = compare(want, got, bl.Tolerances)
				}
			} else if got.Outcome != string(record.Pass) {
				r.Regressions = append(r.Regressions, fmt.Sprintf("outcome %s (%s)", got.Outcome, it.Result.Summary.Reason))
			}
		}
		if r.Err != nil || len(r.Regressions) > 0 {
			failed++
		}
		results = append(results, r)
	}
	sort.Slice(results, func(i, j int) bool { return results[i].Scenario < results[j].Scenario })
	fmt.Fprintln(stdout)
	for _, r := range results {
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
	if err := writeJUnitFile(junitPath, "gaitrig suite", results); err != nil {
		fmt.Fprintln(stderr, "gaitrig suite:", err)
		return exitConfig
	}
	fmt.Fprintf(stdout, "\nJUnit XML: %s\n", junitPath)
	if *writeBase != "" {
		tol := defaultTolerances
		if bl != nil {
			tol = bl.Tolerances
		}
		if err := writeBaseline(*writeBase, tol, entries); err != nil {
			fmt.Fprintln(stderr, "gaitrig suite:", err)
			return exitConfig
		}
		fmt.Fprintf(stdout, "baseline written: %s\n", *writeBase)
	}
	fmt.Fprintf(stdout, "%d of %d scenarios regressed or could not run\n\n%s\n", failed, len(items), safetyCaution)
	if failed > 0 {
		return exitFail
	}
	return exitPass
}

// runSuite runs the items: in-process lockstep ones on a worker pool, the
// rest one at a time afterwards so their timing is not disturbed.
func runSuite(ctx context.Context, items []*suiteItem, dir string, link string, withReport bool, parallel int, stdout io.Writer) {
	var mu sync.Mutex
	runOne := func(it *suiteItem) {
		start := time.Now()
		o := rig.Options{Link: link, RunDir: filepath.Join(dir, it.Scenario.Name), Report: withReport}
		it.Result, it.Err = rig.Run(ctx, it.Scenario, o)
		it.Seconds = time.Since(start).Seconds()
		mu.Lock()
		defer mu.Unlock()
		if it.Err != nil {
			fmt.Fprintf(stdout, "  %-22s could not run: %v\n", it.Scenario.Name, it.Err)
			return
		}
		s := it.Result.Summary
		fmt.Fprintf(stdout, "  %-22s %-8s steps %3d  %.1f s\n", it.Scenario.Name, s.Outcome, s.Steps, it.Seconds)
	}
	var pooled, serial []*suiteItem
	for _, it := range items {
		if canRunInParallel(it.Scenario, link) {
			pooled = append(pooled, it)
		} else {
			serial = append(serial, it)
		}
	}
	if parallel < 1 {
		parallel = 1
	}
	work := make(chan *suiteItem)
	var wg sync.WaitGroup
	for w := 0; w < parallel; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for it := range work {
				runOne(it)
			}
		}()
	}
	for _, it := range pooled {
		work <- it
	}
	close(work)
	wg.Wait()
	for _, it := range serial {
		runOne(it)
	}
}

// canRunInParallel: only lockstep runs against the in-process firmware share
// the machine without changing their results.
func canRunInParallel(sc *scenarios.Scenario, link string) bool {
	if l, err := rig.ParseLink(link); link != "" && (err != nil || !l.InProcess()) {
		return false
	}
	l := sc.Controller.Link
	return (l == scenarios.LinkBuiltin || l == scenarios.LinkNone) && sc.Clock.Mode != scenarios.ClockWallclock
}

// collectScenarios expands the arguments into a sorted list of sources.
func collectScenarios(args []string) ([]string, error) {
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
			return nil, badUsage("%s: %v", a, err)
		}
		if !st.IsDir() {
			out = append(out, a)
			continue
		}
		var files []string
		for _, pat := range []string{"*.yaml", "*.yml"} {
			m, _ := filepath.Glob(filepath.Join(a, pat))
			files = append(files, m...)
		}
		if len(files) == 0 {
			return nil, badUsage("%s: no *.yaml scenario files in this folder", a)
		}
		sort.Strings(files)
		out = append(out, files...)
	}
	return out, nil
}

func writeJUnitFile(path, name string, results []report.ScenarioResult) error {
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

func fileExists(p string) bool {
	_, err := os.Stat(p)
	return err == nil
}

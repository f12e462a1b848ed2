package main

import (
	"context"
	"fmt"
	"io"
	"os"

	"gaitrig/batch"
	"gaitrig/history"
	"gaitrig/record"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

func init() {
	commands["history"] = command{"trend of each figure across firmware builds, with drift flagged, from a --history database", cmdHistory}
	jsonResults["history"] = historyResult{}
}

// historyResult is what history prints with --json: one page per
// scenario.
type historyResult struct {
	Database  string         `json:"database"`       // the DSN, password hidden
	Page      string         `json:"page,omitempty"` // the HTML page written, with --page
	Scenarios []history.Page `json:"scenarios"`      // sorted by name
	Drifting  int            `json:"drifting"`       // figures flagged as drifting, over all scenarios
	Caution   string         `json:"caution"`        // the safety caution
}

// historyFlags are the flags of a command that stores its results in a
// history database (--history, --firmware-revision).
type historyFlags struct {
	dsn, revision *string
}

// addHistoryFlags declares --history and --firmware-revision on c.
func addHistoryFlags(c *cmdline) historyFlags {
	return historyFlags{
		dsn:      c.String("history", "", "store each result in this history `DSN`: sqlite:PATH or postgres://USER@HOST/DB (default: "+history.EnvDSN+")"),
		revision: c.String("firmware-revision", "", "the firmware's source `REVISION` the results are stored under (default: "+history.EnvRevision+")"),
	}
}

// open opens the history database named by --history or GAITRIG_HISTORY;
// nil without either.
func (h historyFlags) open(ctx context.Context) (*history.Store, error) {
	dsn := *h.dsn
	if dsn == "" {
		dsn = os.Getenv(history.EnvDSN)
	}
	if dsn == "" {
		return nil, nil
	}
	return history.Open(ctx, dsn)
}

// rev is the firmware revision from the flag or the environment.
func (h historyFlags) rev() string {
	if *h.revision != "" {
		return *h.revision
	}
	return os.Getenv(history.EnvRevision)
}

// store returns a hook that stores one run's result in s.
func (h historyFlags) store(s *history.Store, command string, sc *scenarios.Scenario) func(rig.Result) error {
	return func(res rig.Result) error {
		r := history.FromRun(command, sc, res, h.rev())
		return s.Add(context.Background(), &r)
	}
}

func cmdHistory(args []string, stdout, stderr io.Writer) int {
	c := newCmdline("history", "", `
Shows each figure of the stored results (gaitrig run, suite, margins, stability
or preflight --history) across firmware builds, oldest first: steps, mean speed,
peak friction utilization, minimum normal force and command latency p99, each
with the band the baseline comparison allows (around the --baseline's entry,
else the oldest build shown); then each margin and the spectral radius stored,
banded by the resolution the oldest build measured them with; and flags drift: a figure that moved the same way over the last --drift-builds
builds by more than that band in total although each build stayed within it.
Writes an HTML page with --page; prints a table, or JSON with --json. Exit
codes: 0 no drift, 1 a figure drifting, 2 bad usage or an unreadable database.`, stdout, stderr)
	dsn := c.String("history", "", "the history `DSN`: sqlite:PATH or postgres://USER@HOST/DB (default: "+history.EnvDSN+")")
	scenario := c.String("scenario", "", "only this `SCENARIO` (default: every scenario stored)")
	basePath := c.String("baseline", "", "centre the bands on this baseline `FILE`'s entries and use its tolerances")
	k := c.Int("drift-builds", history.DefaultDriftBuilds, "look for drift over the last `K` builds")
	last := c.Int("last", 60, "show at most the newest `N` builds")
	page := c.String("page", "", "write the trend page to `FILE` (HTML)")
	c.jsonFlag()
	if done, code := c.parse(args); done {
		return code
	}
	if c.NArg() != 0 {
		return c.usageError("want no arguments, got %d", c.NArg())
	}
	if *k < 1 || *last < 2 || *last > history.MaxSeries {
		return c.usageError("--drift-builds must be ≥ 1 and --last between 2 and %d", history.MaxSeries)
	}
	if *dsn == "" {
		*dsn = os.Getenv(history.EnvDSN)
	}
	if *dsn == "" {
		return c.usageError("want --history DSN or %s", history.EnvDSN)
	}
	tol := batch.DefaultTolerances
	var bl *batch.Baseline
	if *basePath != "" {
		var err error
		if bl, err = batch.ReadBaseline(*basePath); err != nil {
			return c.fail(err)
		}
		tol = bl.Tolerances
	}
	ctx := context.Background()
	st, err := history.Open(ctx, *dsn)
	if err != nil {
		return c.fail(err)
	}
	defer st.Close()
	names := []string{*scenario}
	if *scenario == "" {
		if names, err = st.Scenarios(ctx); err != nil {
			return c.fail(err)
		}
	}
	res := historyResult{Database: st.DSN, Scenarios: []history.Page{}, Caution: record.Caution}
	for _, n := range names {
		rs, err := st.Series(ctx, n, *last)
		if err != nil {
			return c.fail(err)
		}
		if len(rs) == 0 {
			return c.fail(rig.Configf("history %s: no stored results of scenario %q", st.DSN, n))
		}
		var ref *batch.Entry
		if bl != nil {
			if e, ok := bl.Scenarios[n]; ok {
				ref = &e
			}
		}
		p := history.Page{Scenario: n, Builds: len(rs), K: *k, Trends: history.Trends(rs, ref, tol, *k), Caution: record.Caution}
		for _, t := range p.Trends {
			if t.Drift {
				res.Drifting++
			}
		}
		res.Scenarios = append(res.Scenarios, p)
	}
	if *page != "" {
		f, err := os.Create(*page)
		if err != nil {
			return c.fail(rig.ConfigError(err))
		}
		if err := history.WritePage(f, res.Scenarios...); err != nil {
			f.Close()
			return c.fail(err)
		}
		if err := f.Close(); err != nil {
			return c.fail(err)
		}
		res.Page = *page
	}
	code := exitPass
	if res.Drifting > 0 {
		code = exitFail
	}
	if c.jsonMode() {
		return c.printJSON(res, code)
	}
	for _, p := range res.Scenarios {
		fmt.Fprintf(stdout, "%s: %d builds\n", p.Scenario, p.Builds)
		for _, t := range p.Trends {
			flag := ""
			if t.Drift {
				flag = fmt.Sprintf("  DRIFT %+.4g over the last %d builds (band ±%.4g)", t.DriftTotal, p.K, t.Tolerance)
			}
			lastV := "–"
			if n := len(t.Points); n > 0 {
				lastV = fmt.Sprintf("%.4g", t.Points[n-1].Value)
			}
			fmt.Fprintf(stdout, "  %-28s latest %-10s band %.4g ± %.4g%s\n", t.Label, lastV, t.Reference, t.Tolerance, flag)
		}
	}
	if res.Page != "" {
		fmt.Fprintf(stdout, "page: %s\n", res.Page)
	}
	fmt.Fprintf(stdout, "\n%s\n", safetyCaution)
	return code
}

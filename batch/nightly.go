package batch

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"gaitrig/record"
	"gaitrig/report"
	"gaitrig/rig"
)

// Verdicts of one scenario in a suite.
const (
	// VerdictOK: the run matched its baseline entry (or passed its own
	// criteria without a baseline).
	VerdictOK = "ok"
	// VerdictRegressed: something got worse than the baseline allows.
	VerdictRegressed = "regressed"
	// VerdictError: the run could not be carried out (a scenario that does
	// not build, a run folder that cannot be made).
	VerdictError = "error"
	// VerdictInfrastructure: the host spoiled every attempt (HostTrouble):
	// the result says nothing about the firmware build.
	VerdictInfrastructure = "infrastructure"
)

// ScenarioVerdict is one scenario's line in a suite's summary.
type ScenarioVerdict struct {
	Scenario    string   `json:"scenario"`              // scenario name
	Verdict     string   `json:"verdict"`               // ok, regressed, error or infrastructure
	Outcome     string   `json:"outcome"`               // the run's outcome ("" when it could not run)
	Reason      string   `json:"reason,omitempty"`      // the summary's reason for that outcome
	Expected    string   `json:"expected"`              // the outcome the baseline expects ("" = pass)
	Regressions []string `json:"regressions"`           // what got worse than the baseline, in words
	Error       string   `json:"error,omitempty"`       // why it could not run, or the host trouble
	Figures     *Entry   `json:"figures,omitempty"`     // the run's figures, as a baseline entry holds them
	Attempts    int      `json:"attempts"`              // runs made (1 + retries used)
	Quarantined bool     `json:"quarantined,omitempty"` // reported, but does not fail the suite
	RunFolder   string   `json:"run_folder"`            // the last attempt's run folder (in suite.json: relative to its folder)
	Seconds     float64  `json:"seconds"`               // wall time of the last attempt (not compared)
}

// counts reports whether the verdict fails the suite: a regression or a
// run that could not be made, unless quarantined; host trouble never does.
func (v ScenarioVerdict) fails() bool {
	return !v.Quarantined && (v.Verdict == VerdictRegressed || v.Verdict == VerdictError)
}

// count returns how many verdicts fail the suite, how many are
// infrastructure trouble (quarantined or not), and how many quarantined
// scenarios would have failed.
func count(vs []ScenarioVerdict) (failed, infra, quarantined int) {
	for _, v := range vs {
		switch {
		case v.Verdict == VerdictInfrastructure:
			infra++
		case v.fails():
			failed++
		case v.Quarantined && v.Verdict != VerdictOK:
			quarantined++
		}
	}
	return failed, infra, quarantined
}

// HostTrouble reports whether a run was spoiled by the host rather than
// decided by the firmware: outcome invalid (the loop was stalled past the
// watchdog, record.Invalid) or a link that could not be opened
// (rig.ErrLinkOpen). Such a run is made again (Suite.Retries).
func HostTrouble(d Done) bool {
	if d.Err != nil {
		return errors.Is(d.Err, rig.ErrLinkOpen)
	}
	return d.Result.Summary.Outcome == record.Invalid
}

// retry runs the jobs whose result was host trouble again, up to
// s.Retries rounds, each attempt into a run folder of its own
// (NAME.retry-K, so no attempt's record is lost), and replaces their
// results in runs. It returns the number of attempts per job.
func (s Suite) retry(ctx context.Context, jobs []Job, runs []Done) []int {
	attempts := make([]int, len(runs))
	for i := range attempts {
		attempts[i] = 1
	}
	for round := 1; round <= s.Retries && ctx.Err() == nil; round++ {
		var again []int
		for i, d := range runs {
			if HostTrouble(d) {
				again = append(again, i)
			}
		}
		if len(again) == 0 {
			break
		}
		rj := make([]Job, len(again))
		for k, i := range again {
			rj[k] = jobs[i]
			if rj[k].Options.RunDir != "" {
				rj[k].Options.RunDir = fmt.Sprintf("%s.retry-%d", jobs[i].Options.RunDir, round)
			}
		}
		var onDone func(int, Done)
		if s.OnDone != nil {
			onDone = func(k int, d Done) { s.OnDone(again[k], d) }
		}
		rd := Scheduler{Jobs: s.Jobs, Runner: s.Runner, OnDone: onDone}.RunAll(ctx, rj)
		for k, i := range again {
			runs[i] = rd[k]
			attempts[i]++
		}
	}
	return attempts
}

// SuiteSummaryFile is the name of a suite's summary in its folder.
const SuiteSummaryFile = "suite.json"

// SuitePageFile is the name of a suite's HTML page in its folder.
const SuitePageFile = "suite.html"

// SuiteSummaryVersion is the schema version of suite.json; ReadSuiteSummary
// refuses newer ones.
const SuiteSummaryVersion = 1

// SuiteSummary is a suite's result as one file (suite.json): what a shard
// leaves for `gaitrig merge`, and what merge writes for all shards.
type SuiteSummary struct {
	SchemaVersion int    `json:"schema_version"` // SuiteSummaryVersion
	ToolVersion   string `json:"tool_version"`   // rig.ToolVersion of the tool that wrote it
	// Shards lists the shards this summary covers ("K/N"), in order: one
	// for a suite, all N for a merge.
	Shards []string `json:"shards"`
	// Total is how many scenarios the whole list (every shard) has.
	Total int `json:"total"`
	// Baseline is the baseline file compared with ("" for none) and
	// BaselineSHA256 the SHA-256 of its bytes: shards are merged only when
	// they were judged against the same baseline.
	Baseline       string      `json:"baseline,omitempty"`
	BaselineSHA256 string      `json:"baseline_sha256,omitempty"` // hex SHA-256 of the baseline file's bytes; "" for none
	Tolerances     *Tolerances `json:"tolerances,omitempty"`      // the baseline's tolerances
	// Scenarios holds one verdict per scenario, sorted by name.
	Scenarios []ScenarioVerdict `json:"scenarios"`
	// Failed, Infrastructure and Quarantined are SuiteResult's counts.
	Failed         int    `json:"failed"`
	Infrastructure int    `json:"infrastructure"` // SuiteResult.Infrastructure
	Quarantined    int    `json:"quarantined"`    // SuiteResult.Quarantined
	Caution        string `json:"caution"`        // record.Caution
}

// SummaryOf makes the summary of a suite's result: shard sh of a list of
// total scenarios, judged against the baseline file at blPath ("" for
// none; its bytes are hashed so merge can check every shard used the
// same one).
func SummaryOf(res SuiteResult, sh Shard, total int, blPath string, bl *Baseline) (SuiteSummary, error) {
	s := SuiteSummary{SchemaVersion: SuiteSummaryVersion, ToolVersion: rig.ToolVersion(), Shards: []string{sh.String()},
		Total: total, Scenarios: res.Verdicts, Failed: res.Failed, Infrastructure: res.Infrastructure,
		Quarantined: res.Quarantined, Caution: record.Caution}
	if s.Scenarios == nil {
		s.Scenarios = []ScenarioVerdict{}
	}
	if blPath != "" {
		b, err := os.ReadFile(blPath)
		if err != nil {
			return s, rig.Configf("baseline %s: %v", blPath, err)
		}
		sum := sha256.Sum256(b)
		s.Baseline, s.BaselineSHA256 = blPath, hex.EncodeToString(sum[:])
	}
	if bl != nil {
		t := bl.Tolerances
		s.Tolerances = &t
	}
	return s, nil
}

// String returns the shard as "K/N".
func (s Shard) String() string { return fmt.Sprintf("%d/%d", s.K, s.N) }

// WriteSuiteSummary writes s as dir/suite.json (NaN figures as null).
func WriteSuiteSummary(dir string, s SuiteSummary) error {
	var buf bytes.Buffer
	enc := json.NewEncoder(&buf)
	enc.SetEscapeHTML(false)
	enc.SetIndent("", "  ")
	if err := enc.Encode(rig.JSONSafe(s)); err != nil {
		return err
	}
	return os.WriteFile(filepath.Join(dir, SuiteSummaryFile), buf.Bytes(), record.FileMode)
}

// maxSuiteSummaryBytes bounds what ReadSuiteSummary reads: a library of a
// few thousand scenarios fits many times over; anything larger is not a
// summary we wrote.
const maxSuiteSummaryBytes = 64 << 20

// ReadSuiteSummary reads dir/suite.json. Every error wraps rig.ErrConfig
// and names the file.
func ReadSuiteSummary(dir string) (SuiteSummary, error) {
	path := filepath.Join(dir, SuiteSummaryFile)
	var s SuiteSummary
	st, err := os.Stat(path)
	if err != nil {
		return s, rig.Configf("%s: %v (is %s a suite or shard folder?)", path, err, dir)
	}
	if st.Size() > maxSuiteSummaryBytes {
		return s, rig.Configf("%s: %d bytes, more than the %d a suite summary may have", path, st.Size(), maxSuiteSummaryBytes)
	}
	b, err := os.ReadFile(path)
	if err != nil {
		return s, rig.Configf("%s: %v", path, err)
	}
	if err := json.Unmarshal(b, &s); err != nil {
		return s, rig.Configf("%s: not a suite summary: %v", path, err)
	}
	if s.SchemaVersion < 1 || s.SchemaVersion > SuiteSummaryVersion {
		return s, rig.Configf("%s: schema_version %d; this tool reads 1 to %d", path, s.SchemaVersion, SuiteSummaryVersion)
	}
	for i, v := range s.Scenarios {
		switch v.Verdict {
		case VerdictOK, VerdictRegressed, VerdictError, VerdictInfrastructure:
		default:
			// An unknown verdict would count as neither failed nor
			// passed: refuse it rather than let it pass the night.
			return s, rig.Configf("%s: scenarios[%d] (%s): verdict %q is not one of ok, regressed, error, infrastructure", path, i, v.Scenario, v.Verdict)
		}
		if s.Scenarios[i].Regressions == nil {
			s.Scenarios[i].Regressions = []string{}
		}
	}
	return s, nil
}

// Merge combines the summaries of the shards of one suite into the summary
// an unsharded run would have written: every shard K/N of the same N
// exactly once, no scenario twice, the same baseline. With bl not nil,
// every scenario's figures are judged again against it (a baseline given
// to merge wins over the shards'); otherwise the shards' verdicts stand.
// Run folders keep the paths the shards wrote, relative to prefix[i] when
// prefix is given (the folder each shard's summary was read from).
func Merge(parts []SuiteSummary, prefix []string, bl *Baseline, blPath string) (SuiteSummary, error) {
	if len(parts) == 0 {
		return SuiteSummary{}, rig.Configf("merge: no shard summaries")
	}
	out := SuiteSummary{SchemaVersion: SuiteSummaryVersion, ToolVersion: rig.ToolVersion(), Caution: record.Caution,
		Total: parts[0].Total, Baseline: parts[0].Baseline, BaselineSHA256: parts[0].BaselineSHA256, Tolerances: parts[0].Tolerances,
		Scenarios: []ScenarioVerdict{}}
	seen := map[int]string{} // shard K → where it came from
	n := 0
	where := func(i int) string {
		if i < len(prefix) {
			return prefix[i]
		}
		return fmt.Sprintf("summary %d", i+1)
	}
	names := map[string]string{}
	for i, p := range parts {
		for _, s := range p.Shards {
			sh, err := ParseShard(s)
			if err != nil {
				return out, rig.Configf("merge: %s: %v", where(i), err)
			}
			if n == 0 {
				n = sh.N
			}
			if sh.N != n {
				return out, rig.Configf("merge: %s is shard %s, but %s is of %d shards", where(i), s, where(0), n)
			}
			if other, dup := seen[sh.K]; dup {
				return out, rig.Configf("merge: shard %s is both %s and %s", s, other, where(i))
			}
			seen[sh.K] = where(i)
		}
		if p.Total != out.Total {
			return out, rig.Configf("merge: %s counts %d scenarios in the whole list, %s %d: were they run on the same library?", where(i), p.Total, where(0), out.Total)
		}
		if bl == nil && p.BaselineSHA256 != out.BaselineSHA256 {
			return out, rig.Configf("merge: %s was judged against baseline %q, %s against %q (different contents); give merge --baseline to judge every shard against one", where(i), p.Baseline, where(0), out.Baseline)
		}
		for _, v := range p.Scenarios {
			if other, dup := names[v.Scenario]; dup {
				return out, rig.Configf("merge: scenario %s is in %s and in %s", v.Scenario, other, where(i))
			}
			names[v.Scenario] = where(i)
			if i < len(prefix) && v.RunFolder != "" && !filepath.IsAbs(v.RunFolder) {
				v.RunFolder = filepath.Join(prefix[i], v.RunFolder)
			}
			if bl != nil && v.Figures != nil && v.Verdict != VerdictInfrastructure {
				v.Expected, v.Regressions = JudgeEntry(bl, v.Scenario, *v.Figures, v.Reason)
				v.Verdict = VerdictOK
				if len(v.Regressions) > 0 {
					v.Verdict = VerdictRegressed
				}
			}
			if v.Regressions == nil {
				v.Regressions = []string{}
			}
			out.Scenarios = append(out.Scenarios, v)
		}
	}
	var missing []string
	for k := 1; k <= n; k++ {
		if _, ok := seen[k]; !ok {
			missing = append(missing, fmt.Sprintf("%d/%d", k, n))
		}
		out.Shards = append(out.Shards, fmt.Sprintf("%d/%d", k, n))
	}
	if len(missing) > 0 {
		return out, rig.Configf("merge: shard %s missing: an incomplete merge would pass scenarios that never ran", strings.Join(missing, ", "))
	}
	if len(out.Scenarios) != out.Total {
		return out, rig.Configf("merge: the shards hold %d scenarios, the list has %d", len(out.Scenarios), out.Total)
	}
	if bl != nil {
		t := bl.Tolerances
		out.Tolerances = &t
		out.Baseline = blPath
		if b, err := os.ReadFile(blPath); err == nil {
			sum := sha256.Sum256(b)
			out.BaselineSHA256 = hex.EncodeToString(sum[:])
		}
	}
	sort.SliceStable(out.Scenarios, func(i, j int) bool { return out.Scenarios[i].Scenario < out.Scenarios[j].Scenario })
	out.Failed, out.Infrastructure, out.Quarantined = count(out.Scenarios)
	return out, nil
}

// Entries returns the figures of every scenario that ran, by name: a new
// baseline (WriteBaseline).
func (s SuiteSummary) Entries() map[string]Entry {
	out := map[string]Entry{}
	for _, v := range s.Scenarios {
		if v.Figures != nil {
			out[v.Scenario] = *v.Figures
		}
	}
	return out
}

// JUnit makes the suite's JUnit test suite: one case per scenario; a
// regression is a failure, a run that could not be made or was spoiled by
// the host an error (CI systems tell the two apart), and a quarantined
// scenario that did not pass is skipped with what went wrong as the reason.
func (s SuiteSummary) JUnit(name string) report.Suite {
	results := make([]report.ScenarioResult, len(s.Scenarios))
	for i, v := range s.Scenarios {
		results[i] = report.ScenarioResult{Scenario: v.Scenario, Outcome: v.Outcome, Expected: v.Expected, Seconds: v.Seconds, Regressions: v.Regressions}
		if v.Error != "" {
			results[i].Err = errors.New(v.Error)
		}
	}
	js := report.ScenarioSuite(name, results)
	for i, v := range s.Scenarios {
		c := &js.Cases[i]
		if v.Quarantined && (c.Failure != "" || c.Error != "") {
			why := c.Failure + c.Error
			c.Skipped = "quarantined in the suite's configuration, does not fail the suite: " + why
			c.Failure, c.Error = "", ""
		}
	}
	return js
}

// WriteSuiteJUnit writes the suite's JUnit XML (SuiteSummary.JUnit) to
// path, creating its folder.
func WriteSuiteJUnit(path, name string, s SuiteSummary) error {
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		return err
	}
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	if err := report.WriteJUnit(f, s.JUnit(name)); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

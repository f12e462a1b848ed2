package main

import (
	"io"
	"path/filepath"

	"gaitrig/batch"
	"gaitrig/rig"
)

func init() {
	commands["merge"] = command{"combine the folders of the shards of one suite into one result", cmdMerge}
	jsonResults["merge"] = suiteResult{}
}

func cmdMerge(args []string, stdout, stderr io.Writer) int {
	c := newCmdline("merge", "SHARD-FOLDER ...", `
Combines the suite folders of the shards of one suite (gaitrig suite --shard
K/N, each leaving suite.json) into one result in a new folder: one suite.json,
one suite.html, one junit.xml, one baseline comparison, and the exit code an
unsharded run gives (0 all well, 1 a regression or a run that could not be
made, 3 no regression but host trouble, 2 bad usage or shards that do not fit
together: a shard missing or given twice, shards of different counts or
libraries, or judged against different baselines). With --baseline every
scenario's figures are judged again against that file; otherwise the shards'
verdicts stand. Run folders stay where the shards put them.`, stdout, stderr)
	out := c.String("out", "runs", "parent `FOLDER` of the merged result's folder")
	basePath := c.String("baseline", "", "judge every scenario against this baseline `FILE` (default: the shards' verdicts)")
	writeBase := c.String("write-baseline", "", "write the merged figures as a new baseline `FILE`")
	junitFile := c.String("junit-file", "", "write the JUnit XML to `FILE` (default: junit.xml in the merged folder)")
	c.jsonFlag()
	if done, code := c.parse(args); done {
		return code
	}
	if c.NArg() == 0 {
		return c.usageError("want at least one SHARD-FOLDER")
	}
	parts := make([]batch.SuiteSummary, c.NArg())
	for i, dir := range c.Args() {
		s, err := batch.ReadSuiteSummary(dir)
		if err != nil {
			return c.fail(err)
		}
		parts[i] = s
	}
	var bl *batch.Baseline
	if *basePath != "" {
		var err error
		if bl, err = batch.ReadBaseline(*basePath); err != nil {
			return c.fail(err)
		}
	}
	sum, err := batch.Merge(parts, c.Args(), bl, *basePath)
	if err != nil {
		return c.fail(err)
	}
	dir, err := batch.NewDir(*out, "merged")
	if err != nil {
		return c.fail(rig.ConfigError(err))
	}
	for i, v := range sum.Scenarios {
		// Relative to the merged folder, as a suite's summary keeps them.
		if v.RunFolder == "" {
			continue
		}
		from, err1 := filepath.Abs(dir)
		to, err2 := filepath.Abs(v.RunFolder)
		if r, err := filepath.Rel(from, to); err1 == nil && err2 == nil && err == nil {
			sum.Scenarios[i].RunFolder = r
		}
	}
	js := suiteResult{SuiteFolder: dir, Shard: "merged", Baseline: sum.Baseline}
	code, err := writeSuiteResult(c, dir, *junitFile, *writeBase, sum, &js)
	if err != nil {
		return c.fail(rig.ConfigError(err))
	}
	return code
}

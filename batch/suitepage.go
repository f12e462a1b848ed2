package batch

import (
	"fmt"
	"html/template"
	"math"
	"os"
	"path/filepath"

	"gaitrig/record"
)

// suitePage is the suite's page: counts, then one row per scenario with
// its verdict and figures; the caution on top, as on every page we write.
var suitePage = template.Must(template.New("suite").Funcs(template.FuncMap{
	"num": func(f float64, digits int) string {
		if math.IsNaN(f) || math.IsInf(f, 0) {
			return "–"
		}
		return fmt.Sprintf("%.*f", digits, f)
	},
	"p99": func(p *float64) string {
		if p == nil {
			return "–"
		}
		return fmt.Sprintf("%.0f", *p)
	},
	// A run folder in a summary is relative to the summary's folder (as
	// suite and merge write it); an absolute one is made relative to the
	// page's folder.
	"rel": func(base, p string) string {
		if !filepath.IsAbs(p) {
			return filepath.ToSlash(p)
		}
		if r, err := filepath.Rel(base, p); err == nil {
			return filepath.ToSlash(r)
		}
		return filepath.ToSlash(p)
	},
}).Parse(`<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>gaitrig suite: {{len .S.Scenarios}} scenarios</title>
<style>
body{font-family:sans-serif;margin:1.5em;color:#222}
table{border-collapse:collapse}td,th{border:1px solid #bbb;padding:.25em .5em;text-align:left}
td.n{text-align:right}.caution{border:2px solid #a60;padding:.5em;background:#fff6e6}
.ok{background:#e8f4e8}.regressed,.error{background:#fbe3e3}.infrastructure{background:#eeeeee}
</style></head><body>
<h1>Suite result</h1>
<p class="caution" id="caution">{{.S.Caution}}</p>
<p id="counts">{{len .S.Scenarios}} scenarios (shards {{range $i, $s := .S.Shards}}{{if $i}}, {{end}}{{$s}}{{end}}):
{{.S.Failed}} regressed or could not run, {{.S.Infrastructure}} spoiled by the host (infrastructure, not the firmware),
{{.S.Quarantined}} quarantined and not passing.{{if .S.Baseline}} Baseline: {{.S.Baseline}}.{{else}} No baseline: every scenario must pass its own criteria.{{end}}</p>
<table id="scenarios"><thead><tr><th>scenario</th><th>verdict</th><th>outcome</th><th>expected</th><th>steps</th>
<th>mean speed m/s</th><th>peak friction utilization</th><th>min normal force N</th><th>p99 latency µs</th><th>attempts</th><th>what went wrong</th></tr></thead><tbody>
{{range .S.Scenarios}}<tr class="{{.Verdict}}"><td>{{if .RunFolder}}<a href="{{rel $.Dir .RunFolder}}/report.html">{{.Scenario}}</a>{{else}}{{.Scenario}}{{end}}</td>
<td>{{.Verdict}}{{if .Quarantined}} (quarantined){{end}}</td><td>{{.Outcome}}</td><td>{{if .Expected}}{{.Expected}}{{else}}pass{{end}}</td>
{{with .Figures}}<td class="n">{{.Steps}}</td><td class="n">{{num .MeanSpeedMPS 4}}</td><td class="n">{{num .PeakFrictionUtilization 3}}</td><td class="n">{{num .MinNormalForceN 1}}</td><td class="n">{{p99 .LatencyP99US}}</td>{{else}}<td>–</td><td>–</td><td>–</td><td>–</td><td>–</td>{{end}}
<td class="n">{{.Attempts}}</td><td>{{.Error}}{{range .Regressions}}{{.}}<br>{{end}}</td></tr>
{{end}}</tbody></table>
</body></html>
`))

// WriteSuitePage writes the suite's page as dir/suite.html; links to the
// run folders' reports are relative to dir.
func WriteSuitePage(dir string, s SuiteSummary) error {
	f, err := os.OpenFile(filepath.Join(dir, SuitePageFile), os.O_CREATE|os.O_TRUNC|os.O_WRONLY, record.FileMode)
	if err != nil {
		return err
	}
	if err := suitePage.Execute(f, struct {
		S   SuiteSummary
		Dir string
	}{s, dir}); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

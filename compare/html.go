package compare

import (
	"fmt"
	"html/template"
	"io"
	"math"
	"strings"
)

// chart is one overlay: a quantity of both runs on shared axes.
type chart struct {
	Title string
	SVG   template.HTML
}

// Colours of the two runs on the page: A solid, B dashed.
const (
	colourA = "#1f5f7a"
	colourB = "#b4532a"
)

// svgChart draws the series a and b against their times on one pair of
// axes; NaN values leave gaps. ref lines are drawn dashed in grey.
func svgChart(ta, a, tb, b []float64, ref []float64, unit string) template.HTML {
	const W, H, L, R, T, B = 760.0, 190.0, 56.0, 10.0, 10.0, 26.0
	lo, hi := math.Inf(1), math.Inf(-1)
	tmax := 0.0
	for _, v := range append(append([]float64{}, a...), b...) {
		if !math.IsNaN(v) && !math.IsInf(v, 0) {
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
	}
	for _, r := range ref {
		lo, hi = math.Min(lo, r), math.Max(hi, r)
	}
	for _, t := range [][]float64{ta, tb} {
		if len(t) > 0 {
			tmax = math.Max(tmax, t[len(t)-1])
		}
	}
	if math.IsInf(lo, 0) {
		lo, hi = 0, 1
	}
	if hi-lo < 1e-12 {
		lo, hi = lo-0.5, hi+0.5
	}
	pad := (hi - lo) * 0.05
	lo, hi = lo-pad, hi+pad
	if tmax <= 0 {
		tmax = 1
	}
	X := func(t float64) float64 { return L + t/tmax*(W-L-R) }
	Y := func(v float64) float64 { return T + (hi-v)/(hi-lo)*(H-T-B) }
	var sb strings.Builder
	fmt.Fprintf(&sb, `<svg viewBox="0 0 %g %g" width="%g" height="%g" role="img">`, W, H, W, H)
	fmt.Fprintf(&sb, `<rect x="%g" y="%g" width="%g" height="%g" fill="#fff" stroke="#ccc"/>`, L, T, W-L-R, H-T-B)
	for _, r := range ref {
		fmt.Fprintf(&sb, `<line x1="%g" x2="%g" y1="%.1f" y2="%.1f" stroke="#999" stroke-dasharray="4 3"/><text x="%g" y="%.1f" font-size="10" text-anchor="end">%g</text>`,
			L, W-R, Y(r), Y(r), L-4, Y(r)+3, r)
	}
	fmt.Fprintf(&sb, `<text x="%g" y="%g" font-size="10" text-anchor="end">%.3g</text><text x="%g" y="%g" font-size="10" text-anchor="end">%.3g</text>`,
		L-4, T+8, hi, L-4, H-B, lo)
	fmt.Fprintf(&sb, `<text x="%g" y="%g" font-size="10">0 s</text><text x="%g" y="%g" font-size="10" text-anchor="end">%.2f s</text><text x="%g" y="%g" font-size="10">%s</text>`,
		L, H-8, W-R, H-8, tmax, L+40, H-8, template.HTMLEscapeString(unit))
	line := func(t, v []float64, colour, dash string) {
		var d strings.Builder
		pen := false
		for i := range v {
			if i >= len(t) || math.IsNaN(v[i]) || math.IsInf(v[i], 0) {
				pen = false
				continue
			}
			op := "L"
			if !pen {
				op = "M"
			}
			fmt.Fprintf(&d, "%s%.1f %.1f", op, X(t[i]), Y(v[i]))
			pen = true
		}
		if d.Len() > 0 {
			fmt.Fprintf(&sb, `<path d="%s" fill="none" stroke="%s" stroke-width="1.3"%s/>`, d.String(), colour, dash)
		}
	}
	line(ta, a, colourA, "")
	line(tb, b, colourB, ` stroke-dasharray="5 3"`)
	sb.WriteString(`</svg>`)
	return template.HTML(sb.String())
}

// charts are the overlays of the page.
func (r *Result) charts() []chart {
	a, b := r.series[0], r.series[1]
	if a == nil || b == nil {
		return nil
	}
	var out []chart
	for j, name := range a.joints {
		if j >= len(b.joints) || b.joints[j] != name {
			continue
		}
		out = append(out, chart{"joint angle " + name, svgChart(a.t, a.angle[j], b.t, b.angle[j], []float64{0}, "rad")})
	}
	for f, foot := range []string{"left", "right"} {
		out = append(out, chart{"normal force, " + foot + " foot", svgChart(a.t, a.normal[f], b.t, b.normal[f], []float64{0}, "N")})
	}
	for f, foot := range []string{"left", "right"} {
		out = append(out, chart{"friction utilization, " + foot + " foot", svgChart(a.t, a.util[f], b.t, b.util[f], []float64{0, 1}, "|F_t|/(μ_s N)")})
	}
	if a.hasLaten || b.hasLaten {
		out = append(out, chart{"command round trip", svgChart(a.t, a.latency, b.t, b.latency, []float64{0}, "µs")})
	}
	return out
}

var page = template.Must(template.New("compare").Funcs(template.FuncMap{
	"f": func(digits int, v float64) string {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return "—"
		}
		return fmt.Sprintf("%.*f", digits, v)
	},
	"signed": func(digits int, v float64) string {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return "—"
		}
		return fmt.Sprintf("%+.*f", digits, v)
	},
	"v": func(x any) string {
		if x == nil {
			return "(absent)"
		}
		return fmt.Sprint(x)
	},
}).Parse(`<!doctype html>
<html lang="en"><head><meta charset="utf-8"><title>gaitrig: two runs compared</title>
<style>
body{font:14px/1.4 system-ui,sans-serif;margin:1em 2em;color:#1d2430;background:#fbfaf7}
h1{font-size:1.3em} h2{font-size:1.05em;margin-top:1.4em}
.caution{color:#5a4a2a;font-size:.9em}
.verdict{font-weight:600;padding:.3em .6em;display:inline-block;border-radius:3px}
.ok{background:#d8e8d2} .bad{background:#f2d3d7}
table{border-collapse:collapse;font-variant-numeric:tabular-nums;font-size:.9em}
th,td{padding:.15em .5em;border-bottom:1px solid #e3e0d8;text-align:right} th{background:#f1eee8}
td.l,th.l{text-align:left}
.a{color:#1f5f7a} .b{color:#b4532a}
.charts{display:grid;grid-template-columns:repeat(auto-fill,minmax(770px,1fr));gap:.5em}
figure{margin:0} figcaption{font-size:.85em}
</style></head><body>
<h1>Two runs compared</h1>
<p class="caution" id="caution">{{.Caution}}</p>
<p id="verdict" class="verdict {{if .Within}}ok{{else}}bad{{end}}">{{if .Within}}B is within the suite's tolerances of A{{else}}B is outside the suite's tolerances of A{{end}}</p>
{{if .Regressions}}<ul id="regressions">{{range .Regressions}}<li>{{.}}</li>{{end}}</ul>{{end}}
<table id="runs"><tr><th></th><th class="l">run A (reference, solid)</th><th class="l">run B (dashed)</th></tr>
<tr><td class="l">folder</td><td class="l a">{{.A.Dir}}</td><td class="l b">{{.B.Dir}}</td></tr>
<tr><td class="l">scenario</td><td class="l">{{.A.Scenario}}</td><td class="l">{{.B.Scenario}}</td></tr>
<tr><td class="l">firmware</td><td class="l">{{.A.Greeting.Name}} build {{.A.Greeting.Build}} (protocol v{{.A.Greeting.Protocol}})</td><td class="l">{{.B.Greeting.Name}} build {{.B.Greeting.Build}} (protocol v{{.B.Greeting.Protocol}})</td></tr>
<tr><td class="l">clock</td><td class="l">{{.A.Clock}}</td><td class="l">{{.B.Clock}}</td></tr>
{{with .A.Summary}}{{$a := .}}{{with $.B.Summary}}
<tr><td class="l">outcome</td><td class="l">{{$a.Outcome}} {{$a.Reason}}</td><td class="l">{{.Outcome}} {{.Reason}}</td></tr>
<tr><td class="l">steps</td><td>{{$a.Steps}}</td><td>{{.Steps}}</td></tr>
<tr><td class="l">mean speed, m/s</td><td>{{f 4 $a.MeanSpeedMPS}}</td><td>{{f 4 .MeanSpeedMPS}}</td></tr>
<tr><td class="l">peak friction utilization</td><td>{{f 4 $a.PeakFrictionUtilization}}</td><td>{{f 4 .PeakFrictionUtilization}}</td></tr>
<tr><td class="l">least normal force, N</td><td>{{f 2 $a.MinNormalForceN}}</td><td>{{f 2 .MinNormalForceN}}</td></tr>
{{end}}{{end}}
</table>
<h2>Plant trajectories</h2>
<p id="divergence">{{if not .SameStart}}The runs do not start from the same state under the same scenario text, so their trajectories are not compared tick by tick.
{{else if .Divergence}}Same scenario, same initial state: the trajectories part at tick {{.Divergence.Tick}} (t = {{f 4 .Divergence.T}} s), first in {{.Divergence.Field}}: A {{.Divergence.A}}, B {{.Divergence.B}}.
{{else}}Same scenario, same initial state: the trajectories agree bit for bit over all {{.ComparedTicks}} ticks both runs have.{{end}}</p>
<div class="charts">{{range .Charts}}<figure><figcaption>{{.Title}} — <span class="a">A solid</span>, <span class="b">B dashed</span></figcaption>{{.SVG}}</figure>{{end}}</div>
<h2>Scenario differences</h2>
{{if .ScenarioDiffs}}<table id="scenario-diffs"><tr><th class="l">field</th><th class="l">A</th><th class="l">B</th></tr>
{{range .ScenarioDiffs}}<tr><td class="l">{{.Field}}</td><td class="l">{{v .A}}</td><td class="l">{{v .B}}</td></tr>{{end}}</table>
{{else}}<p id="scenario-diffs">The scenario texts agree field by field.</p>{{end}}
<h2>Steps side by side (B − A)</h2>
<table id="steps"><tr><th>#</th><th>duration A</th><th>B</th><th>Δ s</th><th>length A</th><th>B</th><th>Δ m</th><th>speed A</th><th>B</th><th>Δ m/s</th><th>peak util. A</th><th>B</th><th>Δ</th><th>min N A</th><th>B</th><th>Δ N</th></tr>
{{range .Steps}}<tr><td>{{.Index}}</td>
{{if .A}}<td>{{f 3 .A.DurationS}}</td>{{else}}<td>—</td>{{end}}{{if .B}}<td>{{f 3 .B.DurationS}}</td>{{else}}<td>—</td>{{end}}<td>{{if .Diff}}{{signed 3 .Diff.DurationS}}{{end}}</td>
{{if .A}}<td>{{f 3 .A.LengthM}}</td>{{else}}<td>—</td>{{end}}{{if .B}}<td>{{f 3 .B.LengthM}}</td>{{else}}<td>—</td>{{end}}<td>{{if .Diff}}{{signed 3 .Diff.LengthM}}{{end}}</td>
{{if .A}}<td>{{f 3 .A.SpeedMPS}}</td>{{else}}<td>—</td>{{end}}{{if .B}}<td>{{f 3 .B.SpeedMPS}}</td>{{else}}<td>—</td>{{end}}<td>{{if .Diff}}{{signed 3 .Diff.SpeedMPS}}{{end}}</td>
{{if .A}}<td>{{f 3 .A.PeakUtilization}}</td>{{else}}<td>—</td>{{end}}{{if .B}}<td>{{f 3 .B.PeakUtilization}}</td>{{else}}<td>—</td>{{end}}<td>{{if .Diff}}{{signed 3 .Diff.PeakUtilization}}{{end}}</td>
{{if .A}}<td>{{f 1 .A.MinNormalN}}</td>{{else}}<td>—</td>{{end}}{{if .B}}<td>{{f 1 .B.MinNormalN}}</td>{{else}}<td>—</td>{{end}}<td>{{if .Diff}}{{signed 1 .Diff.MinNormalN}}{{end}}</td></tr>
{{end}}</table>
<h2>Alarms</h2>
<table id="alarms"><tr><th class="l">run</th><th>t, s</th><th class="l">severity</th><th class="l">kind</th><th class="l">message</th></tr>
{{range .A.Alarms}}<tr><td class="l a">A</td><td>{{f 3 .T}}</td><td class="l">{{.Severity}}</td><td class="l">{{.Kind}}</td><td class="l">{{.Message}}</td></tr>{{end}}
{{range .B.Alarms}}<tr><td class="l b">B</td><td>{{f 3 .T}}</td><td class="l">{{.Severity}}</td><td class="l">{{.Kind}}</td><td class="l">{{.Message}}</td></tr>{{end}}
</table>
{{if not (or .A.Alarms .B.Alarms)}}<p>Neither run raised an alarm.</p>{{end}}
<p class="caution">{{.Caution}}</p>
</body></html>
`))

// WriteHTML writes the comparison page.
func (r *Result) WriteHTML(w io.Writer) error {
	return page.Execute(w, struct {
		*Result
		Charts []chart
	}{r, r.charts()})
}

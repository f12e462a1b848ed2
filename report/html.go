package report

import (
	"fmt"
	"gaitrig/record"
	"html/template"
	"io"
	"math"
	"strconv"
	"strings"
)

// kv is a labelled value in a small table.
type kv struct{ Key, Value string }

// criterionRow is one pass criterion as shown in the report.
type criterionRow struct {
	Name  string
	Pass  bool
	Value string
	Limit string
}

// jointSeries is one joint's encoder angle and rate, and the torque the
// firmware commanded and the plant received, over time.
type jointSeries struct {
	name               string
	angle, rate        []float64
	commanded, applied []float64
}

// footSeries is one foot's ground reaction over time. mu is the static
// friction coefficient under the foot at each tick; NaN where unknown.
type footSeries struct {
	normal, tangential, mu, util []float64
	// cop is the centre of pressure along the foot, NaN in the air;
	// contactX the contact point's x; mode the contact-mode code.
	cop, contactX []float64
	mode          []int
}

// view is everything the page shows, as plain values: the run-folder
// reader fills it, the page renders it, so neither depends on the other's
// details.
type view struct {
	Outcome     string
	Scenario    string
	Hash        string
	Greeting    string
	Meta        []kv
	Headline    []kv
	Criteria    []criterionRow
	AlarmCounts []kv
	StepCols    []string
	StepRows    [][]string
	Notes       []string
	// Warnings say what the run folder lacks (no summary, cut or
	// unreadable telemetry); the page shows them near the top.
	Warnings []string
	Caution  string
	// MarksKey says what the marks on the time axes mean.
	MarksKey string
	// ScenarioText is the scenario file exactly as it ran.
	ScenarioText string
	// AlarmRows is the alarm log (events that are not plain information),
	// at most maxAlarmRows of them; AlarmRowsCut says how many were left out.
	AlarmRows    []alarmRow
	AlarmRowsCut int

	t []float64
	// latency is the command round trip per tick, µs; NaN where there was
	// no fresh command or no measurement (lockstep).
	latency []float64
	joints  []jointSeries
	feet    [2]footSeries
	alarms  []alarmMark
	poses   []stickPose
	// hipY and hipVX are the hip's height and forward speed; torso is
	// the torso's absolute angle (nil for a compass walker).
	hipY, hipVX, torso []float64
	// knees are the knee angles and lock torques (nil without knees).
	knees *kneeSeries
	// kinetic and potential are the walker's energies, J.
	kinetic, potential []float64
	// pushX and pushY are the push force on the hip, N.
	pushX, pushY []float64
	// latencyLimit is the scenario's p99 latency limit, µs; NaN without one.
	latencyLimit float64
	// modeFree and modeSliding are the contact-mode codes of a foot in
	// the air and a sliding foot (-1 when the manifest does not name them).
	modeFree, modeSliding int

	// What happened, for the marks on the time axes (marks.go).
	segMarks   []segmentMark
	pushes     []window
	faults     []window
	slips      [2][]window
	alarmLines []alarmLine
	// markGap is the time a pixel or so of a time axis covers: bands
	// closer than this are drawn as one.
	markGap float64
	// demands are the friction demands the events report beyond the
	// telemetry (a heel-strike impulse ratio over μs).
	demands []demandMark
	// stepsTotal is how many heel strikes the run had; poses may be fewer.
	stepsTotal int
	// belt is the treadmill side of the run (belt.go); empty without a belt.
	belt beltView
}

// alarmRow is one line of the alarm log table.
type alarmRow struct {
	T, Kind, Severity, Foot, Message string
}

// maxAlarmRows bounds the alarm log table; a run that slips on every step
// for ten minutes would otherwise make the page a log file.
const maxAlarmRows = 200

// figure is one inline SVG plot with its caption.
type figure struct {
	ID      string
	Title   string
	Caption string
	SVG     template.HTML
	// Legend, when not empty, is drawn by the page under the plot.
	Legend []legendItem
	// Half puts the figure beside the next one (square plots: phase
	// portraits, force pairs).
	Half bool
}

// page is the template's data.
type page struct {
	*view
	Figures []figure
}

var footNames = [2]string{"left", "right"}

// finiteCount counts the finite values of v.
func finiteCount(v []float64) int {
	k := 0
	for _, x := range v {
		if !math.IsNaN(x) && !math.IsInf(x, 0) {
			k++
		}
	}
	return k
}

// renderView writes the page for v.
func renderView(w io.Writer, v *view, maxPoints int) error {
	figs, err := buildFigures(v, maxPoints)
	if err != nil {
		return err
	}
	if v.Caution == "" {
		v.Caution = record.Caution
	}
	if err := pageTemplate.Execute(w, page{view: v, Figures: figs}); err != nil {
		return fmt.Errorf("write report: %w", err)
	}
	return nil
}

// fmtFloat prints a measured value with four significant digits, which is
// what a reader compares at a glance; NaN is shown as a dash.
func fmtFloat(x float64) string {
	if math.IsNaN(x) {
		return "–"
	}
	if math.IsInf(x, 0) {
		return strconv.FormatFloat(x, 'g', -1, 64)
	}
	return strconv.FormatFloat(x, 'g', 4, 64)
}

var pageTemplate = template.Must(template.New("report").Funcs(template.FuncMap{
	"lower": strings.ToLower,
	// css passes a colour we made ourselves (cssColor) into a style
	// attribute; html/template would otherwise refuse any dynamic CSS.
	"css": func(s string) template.CSS { return template.CSS(s) },
}).Parse(`<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>gaitrig run report: {{.Scenario}} ({{.Outcome}})</title>
<style>
body{font-family:"Liberation Sans",Arial,Helvetica,sans-serif;color:#222;background:#fafaf7;margin:0;padding:1.2em 2em;max-width:68em}
h1{font-size:1.5em;margin:.2em 0}
h2{font-size:1.15em;margin:1.4em 0 .4em;border-bottom:1px solid #ccc;padding-bottom:.2em}
table{border-collapse:collapse;margin:.4em 0;font-size:.9em}
th,td{border:1px solid #ccc;padding:.25em .6em;text-align:left;vertical-align:top}
th{background:#eeeae0}
td.num{text-align:right;font-variant-numeric:tabular-nums}
.outcome{display:inline-block;padding:.2em .8em;border-radius:.3em;font-weight:bold;color:#fff;letter-spacing:.05em;background:#6b6b6b}
.outcome-pass{background:#2e7d32}
.outcome-fail,.outcome-tripped{background:#b31b1b}
.outcome-aborted{background:#6b6b6b}
.incomplete{border:2px solid #d99a00;background:#fff8e6;padding:.4em 1em;margin:1em 0;font-size:.95em}
.caution{border:2px solid #b31b1b;background:#fff4f0;padding:.6em 1em;margin:1em 0;font-size:.95em}
.caution strong{color:#b31b1b}
.ok{color:#2e7d32;font-weight:bold}
.bad{color:#b31b1b;font-weight:bold}
figure{margin:1em 0;background:#fff;border:1px solid #ddd;padding:.5em}
figure svg.plot{width:100%;height:auto;display:block}
figure.half{display:inline-block;box-sizing:border-box;width:calc(50% - .8em);vertical-align:top;margin-right:.4em}
.legend{font-size:.85em;margin:.2em 0}
.swatch{display:inline-block;width:.8em;height:.8em;border-radius:50%;margin:0 .3em 0 .8em;vertical-align:-.05em}
figcaption{font-size:.85em;color:#444;margin-top:.3em}
.steps{max-height:40em;overflow:auto;display:block}
.notes{font-size:.85em;color:#444}
code{font-size:.95em}
pre{background:#fff;border:1px solid #ddd;padding:.6em;overflow:auto;font-size:.85em}
</style>
</head>
<body>
<header>
<h1>Run report: {{.Scenario}}</h1>
<p>Outcome: <span id="outcome" class="outcome outcome-{{lower .Outcome}}">{{.Outcome}}</span></p>
{{if .Warnings}}<div id="incomplete" class="incomplete"><strong>This run folder is incomplete.</strong><ul>{{range .Warnings}}<li>{{.}}</li>{{end}}</ul></div>
{{end}}<div id="caution" class="caution"><strong>Safety caution.</strong> {{.Caution}}</div>
<table id="run-identity">
<tr><th>scenario</th><td>{{.Scenario}}</td></tr>
<tr><th>scenario hash</th><td><code>{{.Hash}}</code></td></tr>
<tr><th>firmware greeting</th><td><code>{{.Greeting}}</code></td></tr>
{{range .Meta}}<tr><th>{{.Key}}</th><td>{{.Value}}</td></tr>
{{end}}</table>
</header>

<h2>Pass criteria</h2>
{{if .Criteria}}<table id="criteria">
<tr><th>criterion</th><th>result</th><th>value</th><th>limit</th></tr>
{{range .Criteria}}<tr><td>{{.Name}}</td><td>{{if .Pass}}<span class="ok">pass</span>{{else}}<span class="bad">FAIL</span>{{end}}</td><td class="num">{{.Value}}</td><td class="num">{{.Limit}}</td></tr>
{{end}}</table>{{else}}<p id="criteria">The run recorded no pass criteria.</p>{{end}}

<h2>Summary</h2>
<table id="summary">
{{range .Headline}}<tr><th>{{.Key}}</th><td class="num">{{.Value}}</td></tr>
{{end}}</table>
{{if .AlarmCounts}}<table id="alarm-counts">
<tr><th>alarm kind</th><th>count</th></tr>
{{range .AlarmCounts}}<tr><td>{{.Key}}</td><td class="num">{{.Value}}</td></tr>
{{end}}</table>{{end}}
{{if .Notes}}<ul class="notes">{{range .Notes}}<li>{{.}}</li>{{end}}</ul>{{end}}

<h2>Alarm log</h2>
{{if .AlarmRows}}<div class="steps"><table id="alarm-log">
<tr><th>time (s)</th><th>kind</th><th>severity</th><th>foot</th><th>message</th></tr>
{{range .AlarmRows}}<tr><td class="num">{{.T}}</td><td>{{.Kind}}</td><td>{{.Severity}}</td><td>{{.Foot}}</td><td>{{.Message}}</td></tr>
{{end}}</table></div>{{if .AlarmRowsCut}}<p class="notes">{{.AlarmRowsCut}} more alarm(s) not listed; every one is in events.jsonl and on the timeline.</p>{{end}}{{else}}<p id="alarm-log">No alarms were raised.</p>{{end}}

<h2>Plots</h2>
<p id="marks-key" class="notes">{{.MarksKey}}</p>
{{range .Figures}}<figure id="fig-{{.ID}}"{{if .Half}} class="half"{{end}}>
{{.SVG}}
{{if .Legend}}<p class="legend">{{range .Legend}}<span class="swatch" style="background:{{.Color | css}}"></span>{{.Label}} {{end}}</p>{{end}}
<figcaption><strong>{{.Title}}.</strong> {{.Caption}}</figcaption>
</figure>
{{end}}
<h2>Steps</h2>
{{if .StepRows}}<div class="steps"><table id="steps">
<tr>{{range .StepCols}}<th>{{.}}</th>{{end}}</tr>
{{range .StepRows}}<tr>{{range .}}<td class="num">{{.}}</td>{{end}}</tr>
{{end}}</table></div>{{else}}<p id="steps">No heel strikes were recorded.</p>{{end}}

<h2>Scenario</h2>
{{if .ScenarioText}}<details id="scenario-text"><summary>Scenario file as it ran</summary><pre>{{.ScenarioText}}</pre></details>{{else}}<p id="scenario-text">The manifest does not carry the scenario text.</p>{{end}}

<footer class="notes"><p>Made by gaitrig from the run folder. One file: plots are inline SVG, no scripts, no external links.</p></footer>
</body>
</html>
`))

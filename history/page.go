package history

import (
	"fmt"
	"html/template"
	"io"
	"math"
	"strings"

	"gaitrig/record"
)

// Page is what the trend page shows: one scenario's figures across builds.
type Page struct {
	Scenario string  `json:"scenario"`     // the scenario's name
	Builds   int     `json:"builds"`       // results shown
	K        int     `json:"drift_builds"` // drift looked for over this many changes
	Trends   []Trend `json:"figures"`      // the trends of every figure, as Trends returns them
	Caution  string  `json:"caution"`      // record.Caution
}

// plot geometry of each figure, in SVG user units.
const plotW, plotH, plotPad = 640.0, 180.0, 36.0

// svgPlot draws one trend: the tolerance band around the reference, the
// values as a line with a dot per build (red where drifting). Not-measured
// builds leave a gap.
func svgPlot(t Trend) template.HTML {
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, p := range t.Points {
		if !math.IsNaN(p.Value) {
			lo, hi = math.Min(lo, p.Value), math.Max(hi, p.Value)
		}
	}
	if !math.IsNaN(t.Reference) {
		lo, hi = math.Min(lo, t.Reference-t.Tolerance), math.Max(hi, t.Reference+t.Tolerance)
	}
	if math.IsInf(lo, 0) {
		return template.HTML(`<p class="none">not measured in any build</p>`)
	}
	if hi-lo < 1e-12 {
		lo, hi = lo-1, hi+1
	}
	n := len(t.Points)
	x := func(i int) float64 {
		if n < 2 {
			return plotW / 2
		}
		return plotPad + float64(i)*(plotW-2*plotPad)/float64(n-1)
	}
	y := func(v float64) float64 { return plotH - plotPad/2 - (v-lo)/(hi-lo)*(plotH-plotPad) }
	var b strings.Builder
	fmt.Fprintf(&b, `<svg class="plot" data-figure="%s" viewBox="0 0 %g %g" width="%g" height="%g" role="img">`, t.Name, plotW, plotH, plotW, plotH)
	if !math.IsNaN(t.Reference) {
		fmt.Fprintf(&b, `<rect class="band" x="%g" y="%.2f" width="%g" height="%.2f" fill="#dde8f6"/>`,
			plotPad, y(t.Reference+t.Tolerance), plotW-2*plotPad, math.Max(0.5, y(t.Reference-t.Tolerance)-y(t.Reference+t.Tolerance)))
		fmt.Fprintf(&b, `<line class="reference" x1="%g" x2="%g" y1="%.2f" y2="%.2f" stroke="#5b7fb0" stroke-dasharray="4 3"/>`, plotPad, plotW-plotPad, y(t.Reference), y(t.Reference))
	}
	var path []string
	for i, p := range t.Points {
		if math.IsNaN(p.Value) {
			path = append(path, "|")
			continue
		}
		path = append(path, fmt.Sprintf("%.2f,%.2f", x(i), y(p.Value)))
	}
	for _, seg := range strings.Split(strings.Join(path, " "), "|") {
		if s := strings.TrimSpace(seg); s != "" {
			fmt.Fprintf(&b, `<polyline class="values" points="%s" fill="none" stroke="#333" stroke-width="1.5"/>`, s)
		}
	}
	for i, p := range t.Points {
		if math.IsNaN(p.Value) {
			continue
		}
		class, colour := "build", "#333"
		if p.Drifting {
			class, colour = "build drifting", "#c0392b"
		}
		fmt.Fprintf(&b, `<circle class="%s" cx="%.2f" cy="%.2f" r="3.5" fill="%s"><title>%s: %g</title></circle>`, class, x(i), y(p.Value), colour, template.HTMLEscapeString(p.Build), p.Value)
	}
	fmt.Fprintf(&b, `<text x="4" y="%.2f" font-size="11">%.4g</text><text x="4" y="%.2f" font-size="11">%.4g</text>`, y(hi)+4, hi, y(lo)+4, lo)
	b.WriteString(`</svg>`)
	return template.HTML(b.String())
}

var pageTmpl = template.Must(template.New("history").Funcs(template.FuncMap{
	"plot": svgPlot,
	"num": func(f float64) string {
		if math.IsNaN(f) || math.IsInf(f, 0) {
			return "–"
		}
		return fmt.Sprintf("%.4g", f)
	},
}).Parse(`<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>gaitrig history</title>
<style>body{font-family:sans-serif;margin:1.5em;color:#222}.caution{border:2px solid #a60;padding:.5em;background:#fff6e6}
.drift{color:#c0392b;font-weight:bold}section{margin-bottom:1.5em}</style></head><body>
<h1>History across firmware builds</h1>
<p class="caution" id="caution">{{.Caution}}</p>
<p>Oldest build on the left. The shaded band is the baseline's value and how far the baseline comparison lets the figure move; drift is a move the same way over the last builds, more than that in total although each build stayed within it.
Margins and the spectral radius (from gaitrig margins, stability and preflight) have no baseline: their band is the first build's value and the resolution it was measured with (the search's final bracket; half the 95 % bootstrap interval).</p>
{{range .Pages}}{{$p := .}}<article class="scenario" id="scenario-{{.Scenario}}"><h2>{{.Scenario}}: {{.Builds}} builds</h2>
{{range .Trends}}<section class="figure" id="figure-{{$p.Scenario}}-{{.Name}}"><h3>{{.Label}}{{if .Drift}} <span class="drift">drift: {{num .DriftTotal}} over the last {{$p.K}} builds (band ± {{num .Tolerance}})</span>{{end}}</h3>
{{plot .}}
<p class="band-text">band {{num .Reference}} ± {{num .Tolerance}}; builds: {{range $i, $b := .Points}}{{if $i}}, {{end}}{{$b.Build}} {{num $b.Value}}{{end}}</p></section>
{{end}}</article>
{{end}}</body></html>
`))

// WritePage writes the trend page of one or more scenarios as one HTML
// document.
func WritePage(w io.Writer, pages ...Page) error {
	return pageTmpl.Execute(w, struct {
		Caution string
		Pages   []Page
	}{record.Caution, pages})
}

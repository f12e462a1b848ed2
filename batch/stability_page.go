package batch

// This file owns what gaitrig stability writes besides its table: the
// HTML page (the eigenvalues in the complex plane against the unit circle,
// the figures, the gait sensitivity runs) and the JUnit suite.

import (
	"fmt"
	"html/template"
	"math"
	"os"
	"path/filepath"
	"strings"

	"gaitrig/record"
	"gaitrig/report"
)

// StabilityPageFile is the name of the stability page in the folder of a
// gaitrig stability run.
const StabilityPageFile = "stability.html"

// stabilityPlotHalf is the half width of the eigenvalue plot in the
// complex plane: the unit circle with room around it.
const stabilityPlotHalf = 1.25

var stabilityPage = template.Must(template.New("stability").Funcs(template.FuncMap{
	"num": func(f float64, digits int) string {
		if math.IsNaN(f) || math.IsInf(f, 0) {
			return "–"
		}
		return fmt.Sprintf("%.*f", digits, f)
	},
	"rel": func(base, p string) string {
		if p == "" || !filepath.IsAbs(p) {
			return filepath.ToSlash(p)
		}
		if r, err := filepath.Rel(base, p); err == nil {
			return filepath.ToSlash(r)
		}
		return filepath.ToSlash(p)
	},
	// x and y map a point of the complex plane to the plot's pixels
	// (300 × 300, the real axis to the right, the imaginary axis up).
	"x": func(re float64) string { return fmt.Sprintf("%.2f", 150+150*clampPlot(re)/stabilityPlotHalf) },
	"y": func(im float64) string { return fmt.Sprintf("%.2f", 150-150*clampPlot(im)/stabilityPlotHalf) },
	"r": func(mod float64) string {
		return fmt.Sprintf("%.2f", 150*math.Min(mod, stabilityPlotHalf)/stabilityPlotHalf)
	},
	"coords": func(c []string) string { return strings.Join(c, ", ") },
}).Parse(`<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>gaitrig stability: {{.R.Scenario}}</title>
<style>
body{font-family:sans-serif;margin:1.5em;color:#222}
table{border-collapse:collapse;margin:.5em 0}td,th{border:1px solid #bbb;padding:.25em .5em;text-align:left}
td.n{text-align:right}.caution{border:2px solid #a60;padding:.5em;background:#fff6e6}
.stable{background:#e8f4e8}.unstable{background:#fbe3e3}.warning{border:2px solid #c62828;padding:.5em}
</style></head><body>
<h1>Closed-loop stability of {{.R.Scenario}}</h1>
<p class="caution" id="caution">{{.R.Caution}}</p>
<p id="verdict" class="{{if .R.Stable}}stable{{else}}unstable{{end}}">{{if .R.Stable}}Stable{{else}}UNSTABLE{{end}}:
spectral radius {{num .R.SpectralRadius 4}} (95 % bootstrap interval {{num .R.RadiusLow 4}} … {{num .R.RadiusHigh 4}}),
fitted from {{.R.Pairs}} perturbed steps (link-rate perturbations of {{.R.Size}} rad/s, s.d.).
{{if ge .R.DecaySteps 0}}Every perturbation decays by 90 % within {{.R.DecaySteps}} steps.{{else}}A perturbation does not decay by 90 % within 1000 steps.{{end}}
Run folder: <a href="{{rel .Dir .R.Dir}}/report.html">{{.R.Dir}}</a>.</p>
<p id="residual">Fit residual {{num .R.Residual 3}} (relative: near 0 when the plant state decides the next step).</p>
{{if .R.ResidualWarning}}<p class="warning" id="residual-warning">{{.R.ResidualWarning}}</p>{{end}}
<figure id="eigenvalue-plot"><svg xmlns="http://www.w3.org/2000/svg" width="300" height="300" viewBox="0 0 300 300" role="img" aria-label="eigenvalues of the step-to-step map in the complex plane">
<rect x="0" y="0" width="300" height="300" fill="#fff" stroke="#bbb"/>
<line x1="0" y1="150" x2="300" y2="150" stroke="#999"/><line x1="150" y1="0" x2="150" y2="300" stroke="#999"/>
<circle id="unit-circle" cx="150" cy="150" r="{{r 1.0}}" fill="none" stroke="#222" stroke-dasharray="4 3"/>
{{range .R.Eigenvalues}}<circle class="band" cx="150" cy="150" r="{{r .ModulusHigh}}" fill="none" stroke="#1f5fbf" stroke-opacity=".25"/>
<circle class="eigenvalue" cx="{{x .Re}}" cy="{{y .Im}}" r="4" fill="{{if lt .Modulus 1.0}}#1a8f3c{{else}}#c62828{{end}}"><title>{{num .Re 4}} {{num .Im 4}}i, |λ| {{num .Modulus 4}}</title></circle>
{{end}}</svg>
<figcaption>Eigenvalues (Floquet multipliers) of the fitted step-to-step map in the complex plane; the dashed circle is |λ| = 1, inside it a
perturbation shrinks from step to step. Faint circles: the upper end of each modulus's 95 % bootstrap interval.</figcaption></figure>
<table id="eigenvalues"><thead><tr><th>rank</th><th>real</th><th>imaginary</th><th>modulus</th><th>95 % interval of the modulus</th></tr></thead><tbody>
{{range $i, $e := .R.Eigenvalues}}<tr><td class="n">{{$i}}</td><td class="n">{{num $e.Re 4}}</td><td class="n">{{num $e.Im 4}}</td><td class="n">{{num $e.Modulus 4}}</td><td class="n">{{num $e.ModulusLow 4}} … {{num $e.ModulusHigh 4}}</td></tr>
{{end}}</tbody></table>
<p>Coordinates of the map (just after heel strike): {{coords .R.Coordinates}}.</p>
{{if .R.GSN}}<h2>Gait sensitivity norm (Hobbelen and Wisse 2007)</h2>
<table id="gsn"><thead><tr><th>disturbance</th><th>size</th><th>norm</th><th>step time</th><th>step length</th><th>steps</th><th>runs</th></tr></thead><tbody>
{{range .R.GSN}}<tr><td>{{.Disturbance}}</td><td class="n">{{.Size}} {{.Unit}}</td>{{if .Error}}<td colspan="4">{{.Error}}</td>{{else}}<td class="n">{{num .Norm 4}}</td><td class="n">{{num .StepTime 4}} s/{{.Unit}}</td><td class="n">{{num .StepLength 4}} m/{{.Unit}}</td><td class="n">{{.Steps}}</td>{{end}}
<td>{{if .Dir}}<a href="{{rel $.Dir .Dir}}/report.html">disturbed</a>{{end}}{{if .ReferenceDir}}, <a href="{{rel $.Dir .ReferenceDir}}/report.html">undisturbed</a>{{end}}</td></tr>
{{end}}</tbody></table>{{end}}
</body></html>
`))

func clampPlot(v float64) float64 {
	return math.Max(-stabilityPlotHalf, math.Min(stabilityPlotHalf, v))
}

// WriteStabilityPage writes the page of a stability estimate as
// dir/stability.html; links to the run folders are relative to dir.
func WriteStabilityPage(dir string, r StabilityReport) error {
	if r.Caution == "" {
		r.Caution = record.Caution
	}
	f, err := os.OpenFile(filepath.Join(dir, StabilityPageFile), os.O_CREATE|os.O_TRUNC|os.O_WRONLY, record.FileMode)
	if err != nil {
		return err
	}
	if err := stabilityPage.Execute(f, struct {
		R   StabilityReport
		Dir string
	}{r, dir}); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

// StabilitySuite is the JUnit suite of a stability estimate: one case for
// the spectral radius (failed when the gait is not stable, as the
// command's exit code says; the fit residual's warning goes with it) and
// one per gait sensitivity disturbance (failed when the disturbed run
// could not give a norm, for example because it fell).
func StabilitySuite(r StabilityReport) report.Suite {
	s := report.Suite{Name: r.Scenario + " stability"}
	c := report.Case{Name: "spectral_radius", Class: r.Scenario,
		Detail: fmt.Sprintf("spectral radius %.4f (95 %% bootstrap interval %.4f … %.4f) from %d perturbed steps; fit residual %.3f; 90 %% decay in %d steps",
			r.SpectralRadius, r.RadiusLow, r.RadiusHigh, r.Pairs, r.Residual, r.DecaySteps)}
	if r.ResidualWarning != "" {
		c.Detail += "; " + r.ResidualWarning
	}
	if !r.Stable {
		c.Failure = fmt.Sprintf("the gait is not stable: spectral radius %.4f is not below 1", r.SpectralRadius)
	}
	s.Cases = append(s.Cases, c)
	for _, g := range r.GSN {
		gc := report.Case{Name: "gait_sensitivity_" + g.Disturbance, Class: r.Scenario,
			Detail: fmt.Sprintf("%g %s: norm %.4g (step time %.4g s/%s, step length %.4g m/%s, %d steps); run %s", g.Size, g.Unit, g.Norm, g.StepTime, g.Unit, g.StepLength, g.Unit, g.Steps, g.Dir)}
		if g.Error != "" {
			gc.Failure = fmt.Sprintf("%g %s: %s", g.Size, g.Unit, g.Error)
		}
		s.Cases = append(s.Cases, gc)
	}
	return s
}

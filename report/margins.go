package report

// This file owns the margins page (gaitrig margins --html): one survival
// plot per axis, the condition on x and the steps walked on y, passes and
// fails told apart, the limit found and the lab's required minimum marked.

import (
	"fmt"
	"html/template"
	"image/color"
	"io"
	"math"
	"os"

	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"gaitrig/record"
)

// MarginPoint is one run of a margin search.
type MarginPoint struct {
	Value float64 // the condition's value, in the axis's unit
	Steps int     // steps walked
	Pass  bool    // the run met the scenario's pass criteria
}

// MarginAxis is one axis of a margin search as the page shows it.
type MarginAxis struct {
	Name, Unit string // the axis's name and the unit of its values
	// Limit is the last passing value; Required the lab's minimum in the
	// same unit and direction (NaN: none).
	Limit, Required float64
	// Reached is false when every value up to the end of the range passed.
	Reached, NotMonotone bool
	// LastPassDir and FirstFailDir are the run folders that decided the
	// limit; FailReason says what failed in the second.
	LastPassDir, FirstFailDir, FailReason string
	// Points are every run of the axis, grid and bisection.
	Points []MarginPoint
}

// MarginsPage is the content of the margins page.
type MarginsPage struct {
	Scenario, Dir string       // the scenario's name and the search's folder
	Axes          []MarginAxis // one per axis searched, in search order
}

// MarginsHTMLFile is the margins page's file name in the search's folder.
const MarginsHTMLFile = "margins.html"

// WriteMarginsHTML writes the margins page to path.
func WriteMarginsHTML(path string, pg MarginsPage) error {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	if err := RenderMargins(f, pg); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

// Colours of the survival plots: passes green, fails red (the common
// traffic-light reading), the limit black, the required minimum blue.
var (
	passColor     = color.RGBA{R: 0x1a, G: 0x8f, B: 0x3c, A: 0xff}
	failColor     = color.RGBA{R: 0xc6, G: 0x28, B: 0x28, A: 0xff}
	requiredColor = color.RGBA{R: 0x1f, G: 0x5f, B: 0xbf, A: 0xff}
)

type marginFigure struct {
	ID, Title, Caption string
	SVG                template.HTML
}

// RenderMargins writes the margins page to w.
func RenderMargins(w io.Writer, pg MarginsPage) error {
	var figs []marginFigure
	for i, a := range pg.Axes {
		id := fmt.Sprintf("margin-%d", i)
		svg, err := survivalPlot(id, a)
		if err != nil {
			return err
		}
		cap := fmt.Sprintf("Limit %s %s", FormatNumber(a.Limit), a.Unit)
		if !a.Reached {
			cap += " (every value up to the end of the range passed)"
		}
		if !math.IsNaN(a.Required) {
			cap += fmt.Sprintf("; required %s %s", FormatNumber(a.Required), a.Unit)
		}
		if a.NotMonotone {
			cap += "; NOT MONOTONE: a harder value passed again beyond the limit"
		}
		if a.LastPassDir != "" {
			cap += "; last pass: " + a.LastPassDir
		}
		if a.FirstFailDir != "" {
			cap += "; first fail: " + a.FirstFailDir + " (" + a.FailReason + ")"
		}
		figs = append(figs, marginFigure{ID: id, Title: a.Name, Caption: cap, SVG: template.HTML(svg)})
	}
	return marginsTemplate.Execute(w, struct {
		MarginsPage
		Figures []marginFigure
		Caution string
	}{pg, figs, record.Caution})
}

// survivalPlot draws one axis: steps walked against the condition, passes
// as filled circles, fails as crosses, the limit as a solid line and the
// required minimum as a dashed one.
func survivalPlot(id string, a MarginAxis) (string, error) {
	p := newPlot(a.Name, a.Name+" ("+a.Unit+")", "steps walked")
	var pass, fail plotter.XYs
	maxSteps := 1.0
	for _, pt := range a.Points {
		xy := plotter.XY{X: pt.Value, Y: float64(pt.Steps)}
		if pt.Pass {
			pass = append(pass, xy)
		} else {
			fail = append(fail, xy)
		}
		maxSteps = math.Max(maxSteps, float64(pt.Steps))
	}
	add := func(xys plotter.XYs, c color.Color, shape draw.GlyphDrawer, label string) error {
		if len(xys) == 0 {
			return nil
		}
		s, err := plotter.NewScatter(xys)
		if err != nil {
			return err
		}
		s.GlyphStyle = draw.GlyphStyle{Color: c, Radius: vg.Points(3.5), Shape: shape}
		p.Add(s)
		p.Legend.Add(label, s)
		return nil
	}
	if err := add(pass, passColor, draw.CircleGlyph{}, "pass"); err != nil {
		return "", err
	}
	if err := add(fail, failColor, draw.CrossGlyph{}, "fail"); err != nil {
		return "", err
	}
	vline := func(x float64, c color.Color, dashed bool, label string) error {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return nil
		}
		l, err := plotter.NewLine(plotter.XYs{{X: x, Y: 0}, {X: x, Y: maxSteps}})
		if err != nil {
			return err
		}
		l.Color = c
		l.Width = vg.Points(1.2)
		if dashed {
			l.Dashes = []vg.Length{vg.Points(4), vg.Points(3)}
		}
		p.Add(l)
		p.Legend.Add(label, l)
		return nil
	}
	if err := vline(a.Limit, color.Black, false, "limit"); err != nil {
		return "", err
	}
	if err := vline(a.Required, requiredColor, true, "required"); err != nil {
		return "", err
	}
	return renderSVG(p, 16*vg.Centimeter, 7*vg.Centimeter, id, a.Name+": steps walked against "+a.Unit)
}

var marginsTemplate = template.Must(template.New("margins").Parse(`<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>margins of {{.Scenario}}</title>
<style>
body { font-family: sans-serif; margin: 1.5em; max-width: 70em; }
table { border-collapse: collapse; } td, th { border: 1px solid #ccc; padding: 0.2em 0.6em; text-align: left; }
.caution { border: 2px solid #c62828; padding: 0.6em; margin: 1em 0; }
figure { margin: 1.2em 0; } figcaption { font-size: 0.9em; color: #333; }
</style></head><body>
<h1>Margins of {{.Scenario}}</h1>
<p>Run folders in {{.Dir}}. Each plot shows every run of one axis: the condition on x, the steps walked on y; circles passed the scenario's criteria, crosses failed. The solid line is the limit found, the dashed line the lab's required minimum.</p>
<table id="margins-table"><tr><th>axis</th><th>limit</th><th>unit</th><th>required</th><th>note</th></tr>
{{range .Axes}}<tr><td>{{.Name}}</td><td>{{printf "%.4g" .Limit}}</td><td>{{.Unit}}</td><td>{{if eq .Required .Required}}{{printf "%.4g" .Required}}{{end}}</td><td>{{if .NotMonotone}}not monotone {{end}}{{if not .Reached}}passed the whole range{{end}}</td></tr>
{{end}}</table>
{{range .Figures}}<figure>{{.SVG}}<figcaption>{{.Caption}}</figcaption></figure>
{{end}}<div id="caution" class="caution"><strong>Safety caution.</strong> {{.Caution}}</div>
</body></html>
`))

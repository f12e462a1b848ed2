package report

// The treadmill side of the report: the belt speed over the run, drawn
// under the other time plots, with each perturbation pulse marked where it
// started.

import (
	"fmt"
	"html/template"
	"image/color"
	"math"
	"strings"

	"gonum.org/v1/plot/vg"

	"gaitrig/record"
)

// beltView is what the page shows of a treadmill belt.
type beltView struct {
	on     bool      // the terrain has a belt
	speed  []float64 // belt_speed_mps per tick, aligned with view.t
	pulses []beltPulseMark
}

// beltPulseMark is one perturbation: when it starts and by how much.
type beltPulseMark struct {
	start, delta float64
}

// hasBelt reports whether the manifest's terrain has a belt segment.
func hasBelt(p *record.Plant) bool {
	if p == nil {
		return false
	}
	for _, s := range p.Terrain.Segments {
		if s.Belt {
			return true
		}
	}
	return false
}

// event takes the loop's belt_pulse lines (a pulse scheduled, with its
// start time and size).
func (b *beltView) event(e *record.Event) {
	if e.Kind != "belt_pulse" {
		return
	}
	start, ok := e.Values["start_s"]
	if !ok || math.IsNaN(start) || math.IsInf(start, 0) {
		return
	}
	b.pulses = append(b.pulses, beltPulseMark{start: start, delta: e.Values["delta_mps"]})
}

// colPulse marks perturbations: an orange that is neither foot's colour.
var colPulse = color.RGBA{R: 0xd9, G: 0x5f, B: 0x02, A: 0xff}

// beltFigure is the belt speed plot, or false for a run without a belt.
func beltFigure(v *view, w, h vg.Length, maxPoints int) (figure, bool, error) {
	if !v.belt.on || len(v.t) == 0 || len(v.belt.speed) != len(v.t) {
		return figure{}, false, nil
	}
	title := "Treadmill belt speed"
	lo, hi := span(v.belt.speed)
	if !(hi > lo) {
		lo, hi = lo-0.1, hi+0.1
	}
	lines := []line{{label: "belt speed", x: v.t, y: v.belt.speed, color: colLeft, width: vg.Points(1.2)}}
	var marks []string
	for i, p := range v.belt.pulses {
		label := ""
		if i == 0 {
			label = "pulse start"
		}
		lines = append(lines, line{label: label, x: []float64{p.start, p.start}, y: []float64{lo, hi}, color: colPulse, dashed: true})
		marks = append(marks, fmt.Sprintf("%s s (%+.3g m/s)", FormatNumber(p.start), p.delta))
	}
	pl, st, err := linePlot(title, "time (s)", "speed (m/s)", lines, maxPoints)
	if err != nil {
		return figure{}, false, err
	}
	svg, err := renderSVG(pl, w, h, "plot-belt-speed", title)
	if err != nil {
		return figure{}, false, err
	}
	caption := "Speed of the belt surface, positive when it runs backward (as a treadmill runs under a walker facing forward). "
	if len(marks) > 0 {
		caption += "Dashed: perturbation pulses starting at " + strings.Join(marks, ", ") + ". "
	}
	return figure{ID: "plot-belt-speed", Title: title, Caption: caption + st.caption(), SVG: template.HTML(svg)}, true, nil
}

// stickBelt is a treadmill belt as the heel-strike strip draws it: its
// rear and front ends (the rollers), world coordinates in m.
type stickBelt struct {
	rear, front [2]float64
}

// beltEndsOf lays out the manifest's terrain from its start and returns
// the belt segment's ends, or nil without a belt (or a terrain the report
// cannot place).
func beltEndsOf(p *record.Plant) *stickBelt {
	if p == nil {
		return nil
	}
	x, y := p.Terrain.StartM[0], p.Terrain.StartM[1]
	for _, s := range p.Terrain.Segments {
		if !(s.LengthM > 0) {
			return nil
		}
		dx, dy := s.LengthM*math.Cos(s.SlopeRad), s.LengthM*math.Sin(s.SlopeRad)
		if s.Belt {
			return &stickBelt{rear: [2]float64{x, y}, front: [2]float64{x + dx, y + dy}}
		}
		x, y = x+dx, y+dy
	}
	return nil
}

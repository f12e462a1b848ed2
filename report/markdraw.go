package report

import (
	"image/color"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// Fill colours of the bands behind the time plots: translucent so the
// curves stay readable through them, and each band is also labelled in
// words, so nothing is told by colour alone.
var (
	bandPush  = color.NRGBA{R: 0xe0, G: 0x90, B: 0x20, A: 0x40}
	bandFault = color.NRGBA{R: 0x6a, G: 0x3d, B: 0x9a, A: 0x40}
	markSeg   = color.RGBA{R: 0x6b, G: 0x5a, B: 0x3c, A: 0xff}
)

// band is a shaded stretch of time with the words drawn at its top.
type band struct {
	window
	fill color.Color
	// row staggers the labels of overlapping bands: 0 at the top, 1 below.
	row int
	// strip draws the band as a labelled strip along the top edge, in
	// lane row, with dashed lines where it switches on and off, instead of
	// filling the plot's height: a fault that lasts the whole run would
	// otherwise tint every curve.
	strip bool
}

// timeMarks draws what happened behind a time plot: shaded bands (pushes,
// faults, slip episodes), a dotted line with a label where the walker
// reached a new terrain segment, and a thin line per alarm coloured by
// severity. It has no data range, so it never changes a plot's axes.
type timeMarks struct {
	bands  []band
	segs   []segmentMark
	alarms []alarmLine
}

// markFont is the small text of the mark labels.
var markFont = font.From(sansFont, 7.5)

// stripLane is the height of one lane of fault strips; faults take lanes
// in turn, up to maxStripLanes (a fifth shares the first lane).
const (
	stripLane     = vg.Length(7.5 * 1.5)
	maxStripLanes = 4
)

// Plot implements plot.Plotter.
func (m *timeMarks) Plot(c draw.Canvas, p *plot.Plot) {
	trX, _ := p.Transforms(&c)
	inside := func(x vg.Length) bool { return x >= c.Min.X-0.5 && x <= c.Max.X+0.5 }
	sty := text.Style{Color: color.RGBA{R: 0x33, G: 0x33, B: 0x33, A: 0xff}, Font: markFont, Handler: p.Title.TextStyle.Handler}
	edge := draw.LineStyle{Color: color.NRGBA{R: 0x6a, G: 0x3d, B: 0x9a, A: 0xb0}, Width: vg.Points(0.8), Dashes: []vg.Length{vg.Points(3), vg.Points(2)}}
	for _, b := range m.bands {
		if !b.strip {
			continue
		}
		lane := stripLane
		top := c.Max.Y - lane*vg.Length(b.row)
		x0, x1 := trX(b.from), trX(b.until)
		for _, x := range []vg.Length{x0, x1} {
			if inside(x) && x > c.Min.X+0.5 && x < c.Max.X-0.5 {
				c.StrokeLine2(edge, x, c.Min.Y, x, c.Max.Y)
			}
		}
		x0, x1 = vg.Length(math.Max(float64(x0), float64(c.Min.X))), vg.Length(math.Min(float64(x1), float64(c.Max.X)))
		if x1 < x0 {
			continue
		}
		x1 = max(x1, x0+1.5)
		c.FillPolygon(b.fill, []vg.Point{{X: x0, Y: top - lane}, {X: x1, Y: top - lane}, {X: x1, Y: top}, {X: x0, Y: top}})
		c.FillText(sty, vg.Point{X: x0 + 2, Y: top - lane + sty.Font.Size*0.35}, b.label)
	}
	// A label is written only where it does not run into the one before
	// it in the same row: a run that slips at every step still gets one
	// band per slip, and labels as often as they fit.
	lastLabel := map[int]vg.Length{}
	for _, b := range m.bands {
		if b.strip {
			continue
		}
		x0, x1 := trX(b.from), trX(b.until)
		x0, x1 = vg.Length(math.Max(float64(x0), float64(c.Min.X))), vg.Length(math.Min(float64(x1), float64(c.Max.X)))
		if x1 < x0 {
			continue
		}
		if x1-x0 < 1.5 {
			x1 = x0 + 1.5 // a one-tick push stays visible
		}
		c.FillPolygon(b.fill, []vg.Point{{X: x0, Y: c.Min.Y}, {X: x1, Y: c.Min.Y}, {X: x1, Y: c.Max.Y}, {X: x0, Y: c.Max.Y}})
		if last, ok := lastLabel[b.row]; b.label != "" && inside(x0) && (!ok || x0 > last) {
			y := c.Max.Y - sty.Font.Size*(1.2+1.2*vg.Length(b.row))
			c.FillText(sty, vg.Point{X: x0 + 2, Y: y}, b.label)
			lastLabel[b.row] = x0 + 2 + sty.Width(b.label) + 4
		}
	}
	for _, a := range m.alarms {
		x := trX(a.t)
		if !inside(x) {
			continue
		}
		col := color.NRGBAModel.Convert(severityColor(a.severity)).(color.NRGBA)
		col.A = 0x80
		c.StrokeLine2(draw.LineStyle{Color: col, Width: vg.Points(0.8)}, x, c.Min.Y, x, c.Max.Y)
	}
	segLine := draw.LineStyle{Color: markSeg, Width: vg.Points(0.9), Dashes: []vg.Length{vg.Points(1.5), vg.Points(2)}}
	for _, s := range m.segs {
		x := trX(s.t)
		if !inside(x) {
			continue
		}
		c.StrokeLine2(segLine, x, c.Min.Y, x, c.Max.Y)
		c.FillText(sty, vg.Point{X: x + 2, Y: c.Min.Y + 2}, s.label())
	}
}

// marksFor builds the marks of one time plot from what the view found;
// slips adds the slip episodes of the given feet (only the friction plots
// shade them; elsewhere they would hide the curves for no reason).
func marksFor(v *view, slips ...int) *timeMarks {
	m := &timeMarks{segs: v.segMarks, alarms: v.alarmLines}
	for i, w := range v.faults {
		m.bands = append(m.bands, band{window: w, fill: bandFault, row: i % maxStripLanes, strip: true})
	}
	for _, w := range mergeWindows(v.pushes, v.markGap) {
		m.bands = append(m.bands, band{window: w, fill: bandPush, row: 0})
	}
	for _, f := range slips {
		fill := color.NRGBAModel.Convert(lineColors[f]).(color.NRGBA)
		fill.A = 0x38
		for _, w := range mergeWindows(v.slips[f], v.markGap) {
			w.label = "slip " + footNames[f]
			m.bands = append(m.bands, band{window: w, fill: fill, row: f})
		}
	}
	return m
}

// marksCaption says in words what the marks on the time plots mean; the
// page prints it once, above the plots.
func marksCaption(v *view) string {
	s := ""
	if len(v.segMarks) > 0 {
		s += "Dotted brown lines: the walker's first contact with a new terrain segment (its μs and slope written beside). "
	}
	if len(v.pushes) > 0 {
		s += "Orange bands labelled push: a push force acted on the hip. "
	}
	if len(v.faults) > 0 {
		s += "Purple strips along the top, labelled with the fault's kind, between dashed purple lines where it switches on and off: a scenario fault was active. "
	}
	if len(v.slips[0]) > 0 || len(v.slips[1]) > 0 {
		s += "Bands labelled slip left or slip right (on the force, utilization and alarm plots): that foot was sliding. "
	}
	if len(v.alarmLines) > 0 {
		s += "Thin vertical lines: alarms, coloured by severity as on the alarm timeline. "
	}
	if s == "" {
		return "Nothing to mark on the time axes: one terrain segment, no pushes, faults or alarms."
	}
	return "Marks on the time axes. " + s
}

// mergeWindows joins windows less than gap apart: closer than that they
// are one band on the page anyway (gap is about a pixel of the time axis),
// and a long run that slips at every step then draws a band per slip
// rather than thousands of overlapping ones.
func mergeWindows(ws []window, gap float64) []window {
	if len(ws) < 2 || !(gap > 0) {
		return ws
	}
	out := []window{ws[0]}
	for _, w := range ws[1:] {
		last := &out[len(out)-1]
		if w.from-last.until < gap {
			last.until = math.Max(last.until, w.until)
			continue
		}
		out = append(out, w)
	}
	return out
}

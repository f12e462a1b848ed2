package report

import (
	"bytes"
	"fmt"
	"image/color"
	"math"
	"regexp"
	"sort"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgsvg"
)

// Our own plain palette: a dark blue and a burnt orange for the two legs
// (they stay apart for the common forms of colour blindness), a green and a
// purple for further joints, a neutral grey for limits and reference lines.
var (
	colLeft    = color.RGBA{R: 0x1f, G: 0x4e, B: 0x8c, A: 0xff}
	colRight   = color.RGBA{R: 0xc0, G: 0x5a, B: 0x12, A: 0xff}
	colThird   = color.RGBA{R: 0x2e, G: 0x7d, B: 0x32, A: 0xff}
	colFourth  = color.RGBA{R: 0x6a, G: 0x3d, B: 0x9a, A: 0xff}
	colLimit   = color.RGBA{R: 0x55, G: 0x55, B: 0x55, A: 0xff}
	colGround  = color.RGBA{R: 0x8a, G: 0x7a, B: 0x5c, A: 0xff}
	colBody    = color.RGBA{R: 0x30, G: 0x30, B: 0x30, A: 0xff}
	lineColors = []color.Color{colLeft, colRight, colThird, colFourth}
)

// severityColor gives the marker colour of an alarm severity. Unknown
// severities are drawn in the neutral grey rather than refused: a report
// must still render when a newer recorder adds a level.
func severityColor(sev string) color.Color {
	switch strings.ToLower(sev) {
	case "info", "note", "notice":
		return color.RGBA{R: 0x4a, G: 0x7f, B: 0xb5, A: 0xff}
	case "warning", "warn":
		return color.RGBA{R: 0xd9, G: 0x9a, B: 0x00, A: 0xff}
	case "error", "critical", "trip", "fatal":
		return color.RGBA{R: 0xb3, G: 0x1b, B: 0x1b, A: 0xff}
	default:
		return colLimit
	}
}

// severityRank orders severities for the legend, mildest first.
func severityRank(sev string) int {
	switch strings.ToLower(sev) {
	case "info", "note", "notice":
		return 0
	case "warning", "warn":
		return 1
	case "error", "critical", "trip", "fatal":
		return 2
	default:
		return 3
	}
}

// line is one curve on a time plot, held as plain slices so the plotting
// code does not depend on how a run folder stores its columns.
type line struct {
	label  string
	x, y   []float64
	color  color.Color
	dashed bool
	width  vg.Length
}

// plotStats says how much a decimated plot drew out of what it was given;
// the caption repeats it so a reader knows whether the plot is thinned.
type plotStats struct {
	recorded int  // samples per line before thinning (longest line)
	drawn    int  // points per line after thinning (most of any line)
	thinned  bool // some line had more finite samples than its budget
}

func (s plotStats) caption() string {
	switch {
	case s.recorded == 0:
		return "No telemetry samples to draw."
	case !s.thinned:
		return fmt.Sprintf("Every recorded sample drawn (%d per line).", s.recorded)
	default:
		return fmt.Sprintf("Thinned for drawing: at most %d of %d samples per line, keeping the least and greatest value of each short time bucket, so peaks and dips are not lost.",
			s.drawn, s.recorded)
	}
}

var sansFont = font.Font{Typeface: "Liberation", Variant: "Sans"}

// newPlot makes a plot with our text style: sans-serif, modest sizes.
func newPlot(title, xLabel, yLabel string) *plot.Plot {
	p := plot.New()
	p.Title.Text = title
	p.Title.TextStyle.Font = font.From(sansFont, 12)
	p.X.Label.Text = xLabel
	p.Y.Label.Text = yLabel
	for _, ax := range []*plot.Axis{&p.X, &p.Y} {
		ax.Label.TextStyle.Font = font.From(sansFont, 10)
		ax.Tick.Label.Font = font.From(sansFont, 9)
		ax.Tick.Marker = niceTicks{}
	}
	p.Legend.TextStyle.Font = font.From(sansFont, 9)
	p.Legend.Top = true
	p.Legend.Left = false
	p.Add(plotter.NewGrid())
	return p
}

// brokenLine draws one series as several polylines, one per run of
// finite samples. One plotter per series (rather than one plotter.Line per
// run) keeps the plot's layout work and allocations independent of how
// often the series breaks.
type brokenLine struct {
	runs  []run
	style draw.LineStyle
	// pts is reused between runs while drawing.
	pts []vg.Point
}

// Plot implements plot.Plotter.
func (l *brokenLine) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	for _, r := range l.runs {
		l.pts = l.pts[:0]
		for i := range r.x {
			l.pts = append(l.pts, vg.Point{X: trX(r.x[i]), Y: trY(r.y[i])})
		}
		if len(l.pts) == 1 {
			// A lone sample still shows, as a dot-sized stroke.
			l.pts = append(l.pts, vg.Point{X: l.pts[0].X + l.style.Width/2, Y: l.pts[0].Y})
		}
		c.StrokeLines(l.style, c.ClipLinesXY(l.pts)...)
	}
}

// DataRange implements plot.DataRanger.
func (l *brokenLine) DataRange() (xmin, xmax, ymin, ymax float64) {
	xmin, ymin = math.Inf(1), math.Inf(1)
	xmax, ymax = math.Inf(-1), math.Inf(-1)
	for _, r := range l.runs {
		for i := range r.x {
			xmin, xmax = math.Min(xmin, r.x[i]), math.Max(xmax, r.x[i])
			ymin, ymax = math.Min(ymin, r.y[i]), math.Max(ymax, r.y[i])
		}
	}
	return xmin, xmax, ymin, ymax
}

// Thumbnail implements plot.Thumbnailer, for the legend.
func (l *brokenLine) Thumbnail(c *draw.Canvas) {
	y := c.Center().Y
	c.StrokeLine2(l.style, c.Min.X, y, c.Max.X, y)
}

// linePlot draws time series, each thinned to at most about maxPoints
// points and broken where a value is missing (NaN). It leaves headroom
// above the data for the legend, so the legend never hides a peak.
//
// under are drawn first, beneath the lines (the marks of what happened).
func linePlot(title, xLabel, yLabel string, lines []line, maxPoints int, under ...plot.Plotter) (*plot.Plot, plotStats, error) {
	p := newPlot(title, xLabel, yLabel)
	for _, u := range under {
		if u != nil {
			p.Add(u)
		}
	}
	var st plotStats
	ylo, yhi := math.Inf(1), math.Inf(-1)
	entries := 0
	for _, ln := range lines {
		runs, kept, finite := decimateRuns(ln.x, ln.y, maxPoints)
		st.recorded = max(st.recorded, min(len(ln.x), len(ln.y)))
		st.drawn = max(st.drawn, kept)
		st.thinned = st.thinned || kept < finite
		if kept == 0 {
			continue
		}
		bl := &brokenLine{runs: runs, style: draw.LineStyle{Color: ln.color, Width: vg.Points(1)}}
		if ln.width > 0 {
			bl.style.Width = ln.width
		}
		if ln.dashed {
			bl.style.Dashes = []vg.Length{vg.Points(4), vg.Points(3)}
		}
		_, _, lo, hi := bl.DataRange()
		ylo, yhi = math.Min(ylo, lo), math.Max(yhi, hi)
		p.Add(bl)
		if ln.label != "" {
			p.Legend.Add(ln.label, bl)
			entries++
		}
	}
	if ylo <= yhi {
		h := yhi - ylo
		if h == 0 {
			h = math.Max(math.Abs(yhi), 1)
		}
		p.Y.Min = ylo - 0.03*h
		p.Y.Max = yhi + h*(0.03+0.085*float64(entries))
	}
	return p, st, nil
}

// span returns the smallest and largest finite value of v, or (0, 1) when
// there is none, so a reference line always has a range to cover.
func span(v []float64) (lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			continue
		}
		lo = math.Min(lo, x)
		hi = math.Max(hi, x)
	}
	if lo > hi {
		return 0, 1
	}
	return lo, hi
}

// svgHeader matches what vgsvg writes before the <svg> element: an XML
// declaration and a generator comment, both out of place inside HTML.
var svgHeader = regexp.MustCompile(`(?s)^\s*<\?xml[^>]*\?>\s*(<!--.*?-->\s*)?`)

// renderSVG draws p into memory as SVG and returns markup ready to inline
// in HTML: no XML prolog, the given id, class "plot", and an accessible
// label. Sizes are in points; CSS scales the element to the page width.
func renderSVG(p *plot.Plot, w, h vg.Length, id, label string) (string, error) {
	c := vgsvg.New(w, h)
	p.Draw(draw.New(c))
	var buf bytes.Buffer
	if _, err := c.WriteTo(&buf); err != nil {
		return "", fmt.Errorf("render %s: %w", id, err)
	}
	out := svgHeader.ReplaceAllString(buf.String(), "")
	if !strings.HasPrefix(out, "<svg ") {
		return "", fmt.Errorf("render %s: unexpected SVG output starting %.40q", id, out)
	}
	attrs := fmt.Sprintf(`<svg id="%s" class="plot" role="img" aria-label="%s" `, htmlAttr(id), htmlAttr(label))
	return attrs + strings.TrimPrefix(out, "<svg "), nil
}

// htmlAttr escapes s for use inside a double-quoted attribute.
func htmlAttr(s string) string {
	r := strings.NewReplacer(`&`, "&amp;", `"`, "&quot;", `<`, "&lt;", `>`, "&gt;")
	return r.Replace(s)
}

// alarmMark is one alarm or event on the timeline.
type alarmMark struct {
	t        float64
	kind     string
	severity string
}

// alarmTimeline draws one row per alarm kind, time on x, one marker per
// alarm coloured by severity. With no alarms it still draws the empty time
// axis, titled so, because "nothing happened" is a result worth showing.
// The severity legend is left to the page (see severityLegend): inside the
// plot it would cover the markers at the end of the run, where a trip is.
//
// under is drawn beneath the markers (the marks of what happened).
func alarmTimeline(marks []alarmMark, t0, t1 float64, under plot.Plotter) (*plot.Plot, error) {
	title := "Alarm timeline"
	if len(marks) == 0 {
		title = "Alarm timeline: no alarms raised"
	}
	p := newPlot(title, "time (s)", "")
	if under != nil {
		p.Add(under)
	}
	p.X.Min, p.X.Max = t0, math.Max(t1, t0+1e-3)
	kinds := map[string]int{}
	var names []string
	for _, m := range marks {
		if _, ok := kinds[m.kind]; !ok {
			kinds[m.kind] = 0
			names = append(names, m.kind)
		}
	}
	sort.Strings(names)
	for i, n := range names {
		kinds[n] = i
	}
	bySev := map[string]plotter.XYs{}
	for _, m := range marks {
		if math.IsNaN(m.t) || math.IsInf(m.t, 0) {
			continue
		}
		bySev[m.severity] = append(bySev[m.severity], plotter.XY{X: m.t, Y: float64(kinds[m.kind])})
	}
	sevs := make([]string, 0, len(bySev))
	for s := range bySev {
		sevs = append(sevs, s)
	}
	sortSeverities(sevs)
	for _, s := range sevs {
		sc, err := plotter.NewScatter(bySev[s])
		if err != nil {
			return nil, fmt.Errorf("alarm timeline, severity %q: %w", s, err)
		}
		sc.GlyphStyle.Color = severityColor(s)
		sc.GlyphStyle.Radius = vg.Points(3.5)
		sc.GlyphStyle.Shape = draw.CircleGlyph{}
		p.Add(sc)
	}
	p.Y.Min, p.Y.Max = -0.7, math.Max(float64(len(names))-0.3, 0.7)
	p.Y.Tick.Marker = rowTicks(names)
	p.Y.Padding = 0
	return p, nil
}

// sortSeverities orders severity names from the mildest to the most severe
// (unknown words last), alphabetically within a rank, so the timeline's
// markers and its legend list the severities in the same order.
func sortSeverities(sevs []string) {
	sort.Slice(sevs, func(i, j int) bool {
		ri, rj := severityRank(sevs[i]), severityRank(sevs[j])
		if ri != rj {
			return ri < rj
		}
		return sevs[i] < sevs[j]
	})
}

// legendItem is one swatch of a legend drawn by the page.
type legendItem struct {
	Color string // CSS colour, #rrggbb
	Label string
}

// severityLegend lists the severities present in marks, mildest first.
func severityLegend(marks []alarmMark) []legendItem {
	seen := map[string]bool{}
	var sevs []string
	for _, m := range marks {
		if !seen[m.severity] {
			seen[m.severity] = true
			sevs = append(sevs, m.severity)
		}
	}
	sortSeverities(sevs)
	items := make([]legendItem, 0, len(sevs))
	for _, s := range sevs {
		label := s
		if label == "" {
			label = "(no severity)"
		}
		items = append(items, legendItem{Color: cssColor(severityColor(s)), Label: label})
	}
	return items
}

// cssColor writes c as #rrggbb.
func cssColor(c color.Color) string {
	r, g, b, _ := c.RGBA()
	return fmt.Sprintf("#%02x%02x%02x", r>>8, g>>8, b>>8)
}

// rowTicks labels integer rows with the alarm kind names.
type rowTicks []string

// Ticks implements plot.Ticker.
func (r rowTicks) Ticks(min, max float64) []plot.Tick {
	ts := make([]plot.Tick, 0, len(r))
	for i, n := range r {
		ts = append(ts, plot.Tick{Value: float64(i), Label: n})
	}
	return ts
}

package report

import (
	"fmt"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// stickPose is the walker at one heel strike, in world coordinates (m).
type stickPose struct {
	label    string
	hip      [2]float64
	feet     [2][2]float64 // foot ends: left, right
	torsoTop [2]float64
	hasTorso bool
	// slope of the ground under the figure (rad, positive uphill), drawn
	// as a short line through the lower foot.
	slope float64
	// radius of each foot arc (m); 0 draws a point foot (a straight leg).
	radius [2]float64
	// belt, on a treadmill run: the figure stands at its true place on
	// the belt, whose whole length and end rollers are drawn (belt.go).
	belt *stickBelt
	// knee of each kneed leg (world, m), drawn where hasKnee is set: the
	// leg is then a thigh from the hip to the knee and a shank from the
	// knee to the foot.
	knee    [2][2]float64
	hasKnee [2]bool
}

// footArcHalfSpan is half the angle of foot arc drawn, rad. It is only
// drawing: the plant's foot is a full arc, but a rocker of ±40° reads as a
// curved foot at a glance.
const footArcHalfSpan = 0.7

// maxStickFigures bounds the strip: a long run would otherwise give a strip
// of hundreds of tiny figures. Above it, evenly spaced heel strikes are
// drawn (always the first and the last) and the caption says so.
const maxStickFigures = 40

// stickColumns is the number of figures per row of the strip.
const stickColumns = 10

// pickEvenly returns at most k indices out of n, evenly spaced, including
// the first and the last.
func pickEvenly(n, k int) []int {
	if n <= k {
		idx := make([]int, n)
		for i := range idx {
			idx[i] = i
		}
		return idx
	}
	idx := make([]int, 0, k)
	for i := 0; i < k; i++ {
		j := int(math.Round(float64(i) * float64(n-1) / float64(k-1)))
		if len(idx) == 0 || idx[len(idx)-1] != j {
			idx = append(idx, j)
		}
	}
	return idx
}

// stickStrip places each pose in its own slot of a grid (stickColumns per
// row), shifted so its lower foot sits at the slot's origin; the shapes keep
// their true proportions because the canvas is sized to the data's aspect.
type stickStrip struct {
	poses   []stickPose
	scale   float64 // typical leg length, sets slot size
	top     float64 // highest point of any pose above its origin, m
	rows    int
	columns int
	width   float64 // slot width, m of the drawing
}

func newStickStrip(poses []stickPose) *stickStrip {
	scale := 0.0
	for _, ps := range poses {
		for _, f := range ps.feet {
			scale = math.Max(scale, math.Hypot(f[0]-ps.hip[0], f[1]-ps.hip[1]))
		}
		if ps.hasTorso {
			scale = math.Max(scale, math.Hypot(ps.torsoTop[0]-ps.hip[0], ps.torsoTop[1]-ps.hip[1]))
		}
	}
	if scale == 0 || math.IsNaN(scale) || math.IsInf(scale, 0) {
		scale = 1
	}
	width, perRow := 1.6*scale, stickColumns
	for _, ps := range poses {
		if b := ps.belt; b != nil {
			// On a treadmill every slot shows the whole belt at the
			// figures' scale, and every figure where it is, also one
			// that went past an end; fewer slots fit a row of the same
			// width.
			half := math.Hypot(b.front[0]-b.rear[0], b.front[1]-b.rear[1]) / 2
			mid := (b.rear[0] + b.front[0]) / 2
			xs := []float64{ps.hip[0], ps.feet[0][0], ps.feet[1][0]}
			if ps.hasTorso {
				xs = append(xs, ps.torsoTop[0])
			}
			for _, x := range xs {
				half = math.Max(half, math.Abs(x-mid))
			}
			if w := 2*half + 0.5*scale; w > width && !math.IsInf(w, 0) {
				width = w
			}
		}
	}
	perRow = max(1, int(float64(stickColumns)*1.6*scale/width))
	cols := min(perRow, max(len(poses), 1))
	rows := (len(poses) + cols - 1) / cols
	s := &stickStrip{poses: poses, scale: scale, rows: max(rows, 1), columns: cols, width: width}
	for _, ps := range poses {
		o := s.origin(ps)
		top := ps.hip[1]
		if ps.hasTorso {
			top = math.Max(top, ps.torsoTop[1])
		}
		if d := top - o[1]; d > s.top && !math.IsInf(d, 0) {
			s.top = d
		}
	}
	if s.top == 0 {
		s.top = scale
	}
	s.top += 0.08 * scale
	return s
}

func (s *stickStrip) slotW() float64 { return s.width }

// slotH leaves room for the tallest figure and its label below the ground.
func (s *stickStrip) slotH() float64 { return s.top + 0.45*s.scale }

// origin is the world point of pose i that is placed at its slot origin:
// the middle of the belt on a treadmill (so the figure stands where it is
// on the belt), otherwise the lower of the two feet.
func (s *stickStrip) origin(ps stickPose) [2]float64 {
	if b := ps.belt; b != nil {
		return [2]float64{(b.rear[0] + b.front[0]) / 2, (b.rear[1] + b.front[1]) / 2}
	}
	if ps.feet[1][1] < ps.feet[0][1] {
		return ps.feet[1]
	}
	return ps.feet[0]
}

// slot returns where pose i's origin goes in plot coordinates.
func (s *stickStrip) slot(i int) (x, y float64) {
	col, row := i%s.columns, i/s.columns
	return (float64(col) + 0.5) * s.slotW(), -float64(row) * s.slotH()
}

// DataRange implements plot.DataRanger.
func (s *stickStrip) DataRange() (xmin, xmax, ymin, ymax float64) {
	return 0, float64(s.columns) * s.slotW(),
		-float64(s.rows-1)*s.slotH() - 0.4*s.scale, s.top
}

// Plot implements plot.Plotter.
func (s *stickStrip) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	pt := func(ox, oy float64, o, w [2]float64) vg.Point {
		return vg.Point{X: trX(ox + w[0] - o[0]), Y: trY(oy + w[1] - o[1])}
	}
	ground := draw.LineStyle{Color: colGround, Width: vg.Points(1.5)}
	body := draw.LineStyle{Color: colBody, Width: vg.Points(2)}
	legs := [2]draw.LineStyle{
		{Color: colLeft, Width: vg.Points(2.5)},
		{Color: colRight, Width: vg.Points(2.5)},
	}
	for i, ps := range s.poses {
		ox, oy := s.slot(i)
		o := s.origin(ps)
		if ps.belt != nil {
			s.drawBelt(c, ground, ps.belt, func(w [2]float64) vg.Point { return pt(ox, oy, o, w) })
		} else {
			half := 0.7 * s.scale
			dx, dy := half*math.Cos(ps.slope), half*math.Sin(ps.slope)
			c.StrokeLine2(ground, trX(ox-dx), trY(oy-dy), trX(ox+dx), trY(oy+dy))
		}
		if ps.hasTorso {
			c.StrokeLines(body, []vg.Point{pt(ox, oy, o, ps.hip), pt(ox, oy, o, ps.torsoTop)})
		}
		for leg := 0; leg < 2; leg++ {
			r := ps.radius[leg]
			// A kneed leg bends at its knee: the thigh runs from the hip to
			// the knee, the shank from the knee on toward the foot.
			top := ps.hip
			if ps.hasKnee[leg] {
				top = ps.knee[leg]
				c.StrokeLines(legs[leg], []vg.Point{pt(ox, oy, o, ps.hip), pt(ox, oy, o, top)})
				c.DrawGlyph(draw.GlyphStyle{Color: legs[leg].Color, Radius: vg.Points(2.5), Shape: draw.CircleGlyph{}}, pt(ox, oy, o, top))
			}
			if r <= 0 {
				c.StrokeLines(legs[leg], []vg.Point{pt(ox, oy, o, top), pt(ox, oy, o, ps.feet[leg])})
				continue
			}
			// The arc centre lies a radius above the contact point, along
			// the ground normal; the leg axis runs from the hip through it.
			nx, ny := -math.Sin(ps.slope), math.Cos(ps.slope)
			ctr := [2]float64{ps.feet[leg][0] + r*nx, ps.feet[leg][1] + r*ny}
			phi := math.Atan2(ctr[1]-top[1], ctr[0]-top[0])
			const k = 16
			arc := make([]vg.Point, 0, k+1)
			for i := 0; i <= k; i++ {
				a := phi - footArcHalfSpan + 2*footArcHalfSpan*float64(i)/k
				arc = append(arc, pt(ox, oy, o, [2]float64{ctr[0] + r*math.Cos(a), ctr[1] + r*math.Sin(a)}))
			}
			c.StrokeLines(legs[leg], []vg.Point{pt(ox, oy, o, top), pt(ox, oy, o, ctr)})
			c.StrokeLines(legs[leg], arc)
		}
		hip := pt(ox, oy, o, ps.hip)
		c.DrawGlyph(draw.GlyphStyle{Color: colBody, Radius: vg.Points(3), Shape: draw.CircleGlyph{}}, hip)
	}
}

// stickFigurePlot builds the heel-strike strip and the canvas size that
// keeps its proportions at the given width.
func stickFigurePlot(poses []stickPose) (*plot.Plot, vg.Length, vg.Length, error) {
	s := newStickStrip(poses)
	title := "Walker at each heel strike (left leg blue, right leg orange)"
	if len(poses) > 0 && poses[0].belt != nil {
		title = "Walker at each heel strike, at its place on the treadmill belt (left leg blue, right leg orange)"
	}
	if len(poses) == 0 {
		title = "Walker at each heel strike: no heel strikes recorded"
	}
	p := newPlot(title, "", "")
	p.HideAxes()
	p.Add(s)
	labels := plotter.XYLabels{}
	for i, ps := range poses {
		x, y := s.slot(i)
		labels.XYs = append(labels.XYs, plotter.XY{X: x, Y: y - 0.3*s.scale})
		labels.Labels = append(labels.Labels, ps.label)
	}
	if len(poses) > 0 {
		l, err := plotter.NewLabels(labels)
		if err != nil {
			return nil, 0, 0, fmt.Errorf("heel-strike labels: %w", err)
		}
		for i := range l.TextStyle {
			l.TextStyle[i].Font.Size = vg.Points(8)
			l.TextStyle[i].Font.Typeface = sansFont.Typeface
			l.TextStyle[i].Font.Variant = sansFont.Variant
			l.TextStyle[i].XAlign = draw.XCenter
		}
		p.Add(l)
	}
	xmin, xmax, ymin, ymax := s.DataRange()
	p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = xmin, xmax, ymin, ymax
	w := vg.Points(720)
	// Title and padding take about 40 pt; the rest keeps aspect 1:1.
	h := vg.Length(float64(w)*(ymax-ymin)/(xmax-xmin)) + vg.Points(40)
	return p, w, h, nil
}

// drawBelt draws a treadmill belt under a figure: the running surface from
// the rear end to the front end, a roller under each end (the surface is
// tangent to their tops) and the belt's return run beneath, all at the
// figure's scale; at maps world coordinates to the canvas.
func (s *stickStrip) drawBelt(c draw.Canvas, ls draw.LineStyle, b *stickBelt, at func([2]float64) vg.Point) {
	dx, dy := b.front[0]-b.rear[0], b.front[1]-b.rear[1]
	l := math.Hypot(dx, dy)
	if !(l > 0) || math.IsInf(l, 0) {
		return
	}
	nx, ny := -dy/l, dx/l // up from the surface
	r := 0.06 * s.scale   // roller radius, drawing only
	c.StrokeLines(ls, []vg.Point{at(b.rear), at(b.front)})
	c.StrokeLines(ls, []vg.Point{
		at([2]float64{b.rear[0] - 2*r*nx, b.rear[1] - 2*r*ny}),
		at([2]float64{b.front[0] - 2*r*nx, b.front[1] - 2*r*ny}),
	})
	for _, e := range [2][2]float64{b.rear, b.front} {
		ctr := [2]float64{e[0] - r*nx, e[1] - r*ny}
		const k = 20
		ring := make([]vg.Point, 0, k+1)
		for i := 0; i <= k; i++ {
			a := 2 * math.Pi * float64(i) / k
			ring = append(ring, at([2]float64{ctr[0] + r*math.Cos(a), ctr[1] + r*math.Sin(a)}))
		}
		c.StrokeLines(ls, ring)
	}
}

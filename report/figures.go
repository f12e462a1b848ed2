package report

import (
	"fmt"
	"html/template"
	"math"
	"sort"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// Plot sizes in points; CSS scales them to the page width.
const (
	figW, figH   = vg.Length(720), vg.Length(260) // full-width time plots
	shortH       = vg.Length(200)                 // full-width plots of one quantity
	halfW, halfH = vg.Length(360), vg.Length(320) // side-by-side plots
)

// figureSet collects the report's figures in page order.
type figureSet struct {
	figs []figure
	max  int // point budget per line
}

// add renders p and appends it as a figure.
func (fs *figureSet) add(p *plot.Plot, w, h vg.Length, id, title, caption string, half bool) error {
	svg, err := renderSVG(p, w, h, id, title)
	if err != nil {
		return err
	}
	fs.figs = append(fs.figs, figure{ID: id, Title: title, Caption: caption, SVG: template.HTML(svg), Half: half})
	return nil
}

// timePlot draws lines against time with the run's marks beneath them.
func (fs *figureSet) timePlot(v *view, id, title, unit, caption string, lines []line, h vg.Length, slips ...int) (*plot.Plot, error) {
	p, st, err := linePlot(title, "time (s)", unit, lines, fs.max, marksFor(v, slips...))
	if err != nil {
		return nil, err
	}
	roomForStrips(p, v, h)
	return p, fs.add(p, figW, h, id, title, caption+" "+st.caption(), false)
}

// roomForStrips raises the top of a linear time plot of height h and moves
// its legend down so the fault strips along the top edge (markdraw.go)
// cover neither the data nor the legend.
func roomForStrips(p *plot.Plot, v *view, h vg.Length) {
	lanes := min(len(v.faults), maxStripLanes)
	if lanes == 0 {
		return
	}
	room := stripLane * vg.Length(lanes)
	inner := max(h-70, 60) // about the data area: less title, axis and labels
	frac := float64(room / inner)
	p.Y.Max += (p.Y.Max - p.Y.Min) * frac / (1 - frac)
	p.Legend.YOffs -= room
}

// buildFigures draws every plot of the report. Each gets a fixed id so
// tests (and readers who link to a plot) can find it.
func buildFigures(v *view, maxPoints int) ([]figure, error) {
	fs := &figureSet{max: maxPoints}
	v.MarksKey = marksCaption(v)
	steps := []func(*figureSet, *view) error{
		jointFigures, torqueFigure, bodyFigures, latencyFigures, forceFigures,
		utilizationFigure, kneeFigure, beltFigures, copFigure, phaseFigures, alarmFigure, stickFigure,
	}
	for _, f := range steps {
		if err := f(fs, v); err != nil {
			return nil, err
		}
	}
	return fs.figs, nil
}

// beltFigures: the belt speed with its perturbations, under the force and
// utilization plots (treadmill runs only; belt.go).
func beltFigures(fs *figureSet, v *view) error {
	f, ok, err := beltFigure(v, figW, figH, fs.max)
	if err == nil && ok {
		fs.figs = append(fs.figs, f)
	}
	return err
}

// jointFigures: joint angles and rates as the firmware read them.
func jointFigures(fs *figureSet, v *view) error {
	var angles, rates []line
	for i, j := range v.joints {
		col := lineColors[i%len(lineColors)]
		angles = append(angles, line{label: j.name, x: v.t, y: j.angle, color: col, dashed: i%2 == 1})
		rates = append(rates, line{label: j.name, x: v.t, y: j.rate, color: col, dashed: i%2 == 1})
	}
	if _, err := fs.timePlot(v, "plot-joint-angles", "Joint angles (encoder reading)", "angle (rad)",
		"Joint angle is child link minus parent link, counter-clockwise positive, as the firmware was sent it (after the sensor model).", angles, figH); err != nil {
		return err
	}
	_, err := fs.timePlot(v, "plot-joint-rates", "Joint rates (encoder reading)", "rate (rad/s)",
		"Rate of each joint angle, counter-clockwise positive, as the firmware was sent it (after the sensor model: quantization, noise, bias, frozen sensors).", rates, figH)
	return err
}

// torqueFigure: what the firmware asked for and what the plant got after
// the actuator model (limits, lag). A gap between the two is saturation or
// lag the firmware may not know about. The commanded line is dashed, wider
// and drawn on top, so where the two agree the dashes sit on the solid
// line and where they part both are seen.
func torqueFigure(fs *figureSet, v *view) error {
	var tl []line
	for i, j := range v.joints {
		col := lineColors[i%len(lineColors)]
		tl = append(tl, line{label: j.name + " applied (solid)", x: v.t, y: j.applied, color: col, width: vg.Points(1)})
	}
	for i, j := range v.joints {
		col := lineColors[i%len(lineColors)]
		tl = append(tl, line{label: j.name + " commanded (dashed)", x: v.t, y: j.commanded, color: col, dashed: true, width: vg.Points(1.6)})
	}
	_, err := fs.timePlot(v, "plot-torques", "Joint torques, commanded and applied", "torque (N·m)",
		"Dashed: what the firmware commanded; solid: what the plant received after the actuator model's limits and lag.", tl, figH)
	return err
}

// bodyFigures: torso pitch, hip height and speed, and energy.
func bodyFigures(fs *figureSet, v *view) error {
	if v.torso != nil {
		if _, err := fs.timePlot(v, "plot-torso-pitch", "Torso pitch", "angle from vertical (rad)",
			"Absolute angle of the torso from the world vertical (plant state), counter-clockwise positive: a forward lean is negative.",
			[]line{{label: "torso", x: v.t, y: v.torso, color: colThird}}, shortH); err != nil {
			return err
		}
	}
	if _, err := fs.timePlot(v, "plot-hip-height", "Hip height", "height (m)",
		"Height of the hip above y = 0 (plant state); on a slope the ground itself rises or falls.",
		[]line{{label: "hip height", x: v.t, y: v.hipY, color: colLeft}}, shortH); err != nil {
		return err
	}
	if _, err := fs.timePlot(v, "plot-hip-speed", "Hip forward speed", "speed (m/s)",
		"Hip velocity along x, forward positive (plant state).",
		[]line{{label: "hip speed", x: v.t, y: v.hipVX, color: colRight}}, shortH); err != nil {
		return err
	}
	kin, dpot, dtot, p0, e0 := energySeries(v.kinetic, v.potential)
	_, err := fs.timePlot(v, "plot-energy", "Mechanical energy", "energy (J)",
		fmt.Sprintf("Kinetic energy, and the potential and total energy as changes from their first recorded values (potential %s J, total %s J), so the kinetic curve is not flattened by the potential's offset. Steps down in the total are heel-strike losses; rises are actuator and push work.", fmtFloat(p0), fmtFloat(e0)),
		[]line{
			{label: "kinetic", x: v.t, y: kin, color: colLeft},
			{label: "potential − start", x: v.t, y: dpot, color: colRight, dashed: true},
			{label: "total − start", x: v.t, y: dtot, color: colBody, width: vg.Points(1.4)},
		}, figH)
	return err
}

// energySeries returns the kinetic energy, and the potential and total
// energy less their first finite values (which it also returns).
func energySeries(kin, pot []float64) (k, dp, dt []float64, p0, e0 float64) {
	n := min(len(kin), len(pot))
	p0, e0 = math.NaN(), math.NaN()
	for i := 0; i < n; i++ {
		if e := kin[i] + pot[i]; !math.IsNaN(e) && !math.IsInf(e, 0) {
			p0, e0 = pot[i], e
			break
		}
	}
	k, dp, dt = kin[:n], make([]float64, n), make([]float64, n)
	for i := 0; i < n; i++ {
		dp[i] = pot[i] - p0
		dt[i] = kin[i] + pot[i] - e0
	}
	return k, dp, dt, p0, e0
}

// latencyFigures: the round trip over time and as a distribution, both on
// log axes, so one long spike cannot flatten the rest; only where it was
// measured (wall-clock runs).
func latencyFigures(fs *figureSet, v *view) error {
	e, dropped := newECDF(v.latency)
	if len(e.sorted) == 0 {
		return nil
	}
	pos := make([]float64, len(v.latency))
	for i, x := range v.latency {
		pos[i] = x
		if !(x > 0) {
			pos[i] = math.NaN() // a log axis cannot place it; newECDF counted it
		}
	}
	lo, hi := e.sorted[0], e.sorted[len(e.sorted)-1]
	limit := v.latencyLimit
	hasLimit := limit > 0 && !math.IsInf(limit, 0)
	if hasLimit {
		lo, hi = math.Min(lo, limit), math.Max(hi, limit)
	}
	tlo, thi := span(v.t)
	lines := []line{{label: "round trip", x: v.t, y: pos, color: colFourth}}
	if hasLimit {
		lines = append(lines, line{label: "p99 limit " + FormatNumber(limit) + " µs", x: []float64{tlo, thi}, y: []float64{limit, limit}, color: colLimit, dashed: true, width: vg.Points(1.2)})
	}
	title := "Command round-trip latency"
	p, st, err := linePlot(title, "time (s)", "latency (µs, log scale)", lines, fs.max, marksFor(v))
	if err != nil {
		return err
	}
	logAxis(&p.Y, lo, hi, len(lines))
	if err := fs.add(p, figW, figH, "plot-latency", title,
		"State sent to command received, per tick with a fresh command; gaps are ticks that held the last command. "+st.caption(), false); err != nil {
		return err
	}

	// The distribution: for each latency, the fraction of commands that
	// came back at least that fast.
	x, pr := e.points(fs.max)
	sx, sy := stairs(x, pr)
	title = "Round-trip latency distribution"
	p = newPlot(title, "latency (µs, log scale)", "fraction of commands ≤ latency")
	dist := &brokenLine{runs: []run{{sx, sy}}, style: draw.LineStyle{Color: colFourth, Width: vg.Points(1.4)}}
	p.Add(dist)
	p.Legend.Add("measured", dist)
	ref := &brokenLine{runs: []run{{[]float64{lo / 2, hi * 2}, []float64{0.99, 0.99}}}, style: draw.LineStyle{Color: colLimit, Width: vg.Points(0.6), Dashes: []vg.Length{vg.Points(1), vg.Points(2)}}}
	p.Add(ref)
	p.Legend.Add("fraction 0.99", ref)
	if hasLimit {
		lim := &brokenLine{runs: []run{{[]float64{limit, limit}, []float64{0, 1}}}, style: draw.LineStyle{Color: colLimit, Width: vg.Points(1.2), Dashes: []vg.Length{vg.Points(4), vg.Points(3)}}}
		p.Add(lim)
		p.Legend.Add("p99 limit "+FormatNumber(limit)+" µs", lim)
	}
	p.Legend.Top, p.Legend.Left = false, true
	p.Legend.XOffs, p.Legend.YOffs = vg.Points(6), vg.Points(-6)
	p.Y.Min, p.Y.Max = 0, 1.02
	logAxis(&p.X, lo, hi, 0)
	caption := fmt.Sprintf("Empirical distribution of the %d measured round trips from the latency_us column: p50 %s µs, p99 %s µs, max %s µs (nearest rank). The dashed vertical line is the scenario's p99 limit; the distribution crosses the dotted 0.99 line left of it when the criterion holds.",
		len(e.sorted), FormatNumber(e.quantile(0.5)), FormatNumber(e.quantile(0.99)), FormatNumber(hi))
	if !hasLimit {
		caption = fmt.Sprintf("Empirical distribution of the %d measured round trips from the latency_us column: p50 %s µs, p99 %s µs, max %s µs (nearest rank). The scenario sets no latency limit.",
			len(e.sorted), FormatNumber(e.quantile(0.5)), FormatNumber(e.quantile(0.99)), FormatNumber(e.sorted[len(e.sorted)-1]))
	}
	if dropped > 0 {
		caption += fmt.Sprintf(" %d value(s) of zero or less left out: a log axis cannot show them.", dropped)
	}
	if len(x) < len(e.sorted) {
		caption += fmt.Sprintf(" Drawn through %d points evenly spaced in rank, the smallest and largest included.", len(x))
	}
	if err := fs.add(p, figW, figH, "plot-latency-cdf", title, caption, false); err != nil {
		return err
	}
	return latencyTail(fs, e, x, pr, lo, hi, limit, hasLimit)
}

// latencyTail draws the same distribution as the fraction of commands
// slower than each latency, on log axes both ways: the last percent, which
// a p99 criterion is about and which the distribution function squeezes
// against 1.0, gets as much room as the bulk.
func latencyTail(fs *figureSet, e ecdf, x, pr []float64, lo, hi, limit float64, hasLimit bool) error {
	n := float64(len(e.sorted))
	var tx, ty []float64
	for i := range x {
		if ex := 1 - pr[i]; ex > 0.5/n {
			tx, ty = append(tx, x[i]), append(ty, ex)
		}
	}
	title := "Round-trip latency tail"
	p := newPlot(title, "latency (µs, log scale)", "fraction slower (log)")
	floor := 1 / n
	if len(tx) > 0 {
		tail := &brokenLine{runs: []run{{tx, ty}}, style: draw.LineStyle{Color: colFourth, Width: vg.Points(1.4)}}
		p.Add(tail)
		p.Legend.Add("measured", tail)
	}
	one := &brokenLine{runs: []run{{[]float64{lo / 2, hi * 2}, []float64{0.01, 0.01}}}, style: draw.LineStyle{Color: colLimit, Width: vg.Points(0.6), Dashes: []vg.Length{vg.Points(1), vg.Points(2)}}}
	p.Add(one)
	p.Legend.Add("1 % slower (p99)", one)
	if hasLimit {
		lim := &brokenLine{runs: []run{{[]float64{limit, limit}, []float64{floor / 2, 1}}}, style: draw.LineStyle{Color: colLimit, Width: vg.Points(1.2), Dashes: []vg.Length{vg.Points(4), vg.Points(3)}}}
		p.Add(lim)
		p.Legend.Add("p99 limit "+FormatNumber(limit)+" µs", lim)
	}
	logAxis(&p.X, lo, hi, 0)
	p.Y.Scale = plot.LogScale{}
	p.Y.Tick.Marker = logTicks{}
	p.Y.Min, p.Y.Max = math.Min(floor/1.5, 0.005), 1.5
	p.Legend.Top, p.Legend.Left = false, true
	p.Legend.XOffs, p.Legend.YOffs = vg.Points(6), vg.Points(6)
	slower := 0
	if hasLimit {
		slower = len(e.sorted) - sort.SearchFloat64s(e.sorted, math.Nextafter(limit, math.Inf(1)))
	}
	caption := fmt.Sprintf("The same %d round trips as the fraction slower than each latency, both axes logarithmic, so the slowest percent is drawn as large as the bulk; the curve ends at the slowest command but one (a fraction of 1/%d).", len(e.sorted), len(e.sorted))
	if hasLimit {
		caption += fmt.Sprintf(" %d command(s) were slower than the limit of %s µs; the criterion holds while the curve crosses the dotted 1 %% line left of the dashed limit.", slower, FormatNumber(limit))
	}
	return fs.add(p, figW, figH, "plot-latency-tail", title, caption, false)
}

// logAxis puts a log scale on ax covering [lo, hi] with some room, and
// headroom above for legend entries when entries > 0.
func logAxis(ax *plot.Axis, lo, hi float64, entries int) {
	ax.Scale = plot.LogScale{}
	ax.Tick.Marker = logTicks{}
	if !(lo > 0) {
		lo = 1
	}
	if !(hi > lo) {
		hi = lo * 10
	}
	ax.Min = lo / 1.5
	ax.Max = hi * 1.5 * math.Pow(hi/lo, 0.1*float64(entries))
}

// stairs turns the corners of a distribution function into the points of
// its step curve: flat at the previous fraction up to each sample, then up.
func stairs(x, p []float64) (sx, sy []float64) {
	prev := 0.0
	for i := range x {
		sx = append(sx, x[i], x[i])
		sy = append(sy, prev, p[i])
		prev = p[i]
	}
	return sx, sy
}

// forceFigures: each foot's ground force over time with the edges of the
// friction cone, and the force pair (N, F_t) against the cone ±μs·N.
func forceFigures(fs *figureSet, v *view) error {
	for f := 0; f < 2; f++ {
		ft := v.feet[f]
		upper := make([]float64, len(ft.normal))
		lower := make([]float64, len(ft.normal))
		for i, n := range ft.normal {
			mu := math.NaN()
			if i < len(ft.mu) {
				mu = ft.mu[i]
			}
			upper[i], lower[i] = mu*n, -mu*n
		}
		id := "plot-force-" + footNames[f]
		title := fmt.Sprintf("Ground reaction force, %s foot", footNames[f])
		if _, err := fs.timePlot(v, id, title, "force (N)",
			"The foot holds without slipping while T stays between the dashed lines ±μs·N (the edges of the friction cone); "+
				"N below zero would mean the ground has to pull the foot down. Zero while the foot is in the air.",
			[]line{
				{label: "normal N", x: v.t, y: ft.normal, color: colLeft, width: vg.Points(1.2)},
				{label: "tangential T", x: v.t, y: ft.tangential, color: colRight},
				{label: "±μs·N", x: v.t, y: upper, color: colLimit, dashed: true},
				{label: "", x: v.t, y: lower, color: colLimit, dashed: true},
			}, figH, f); err != nil {
			return err
		}
	}
	mus := distinctMu(v)
	for f := 0; f < 2; f++ {
		if err := conePlot(fs, v, f, mus); err != nil {
			return err
		}
	}
	return nil
}

// distinctMu lists the static friction coefficients the feet met, from the
// per-tick μs of the friction envelope, ascending.
func distinctMu(v *view) []float64 {
	seen := map[float64]bool{}
	var out []float64
	for f := range v.feet {
		for _, m := range v.feet[f].mu {
			if m > 0 && !math.IsInf(m, 0) && !seen[m] {
				// Recovered μs (no terrain in the manifest) varies in the
				// last digits; round so it gives one cone, not thousands.
				r := math.Round(m*1000) / 1000
				if !seen[r] {
					seen[r] = true
					out = append(out, r)
				}
				seen[m] = true
			}
		}
	}
	sort.Float64s(out)
	if len(out) > 6 {
		out = []float64{out[0], out[len(out)-1]}
	}
	return out
}

// conePlot draws one foot's (N, F_t) pairs while in contact, with the
// cone's edges ±μs·N for every μs the walker met: a point outside its
// cone is a foot asking for more friction than the ground has.
func conePlot(fs *figureSet, v *view, f int, mus []float64) error {
	ft := v.feet[f]
	var n, tg, ns, ts []float64
	for i := range ft.normal {
		if i >= len(ft.mode) || ft.mode[i] == v.modeFree {
			continue
		}
		if ft.mode[i] == v.modeSliding {
			ns, ts = append(ns, ft.normal[i]), append(ts, ft.tangential[i])
		} else {
			n, tg = append(n, ft.normal[i]), append(tg, ft.tangential[i])
		}
	}
	id := "plot-cone-" + footNames[f]
	title := fmt.Sprintf("Force pair in the friction cone, %s foot", footNames[f])
	p := newPlot(title, "normal force N (N)", "tangential force T (N)")
	_, nmax := span(append(append([]float64{0}, n...), ns...))
	ylo, yhi := span(append(append([]float64{0}, tg...), ts...))
	drawn := 0
	for k, mu := range mus {
		// Each μs gets its own dash gap, so two cones differ in more than
		// their label.
		edge := &brokenLine{
			runs:  []run{{[]float64{0, nmax}, []float64{0, mu * nmax}}, {[]float64{0, nmax}, []float64{0, -mu * nmax}}},
			style: draw.LineStyle{Color: colLimit, Width: vg.Points(0.9), Dashes: []vg.Length{vg.Points(4), vg.Points(2 + 2*float64(k))}},
		}
		p.Add(edge)
		p.Legend.Add("±μs·N, μs "+fmtFloat(mu), edge)
	}
	add := func(x, y []float64, col draw.GlyphStyle, label string) error {
		if len(x) == 0 {
			return nil
		}
		xs, ys := decimateMinMax(x, y, fs.max)
		drawn += len(xs)
		pts := make(plotter.XYs, len(xs))
		for i := range xs {
			pts[i] = plotter.XY{X: xs[i], Y: ys[i]}
		}
		sc, err := plotter.NewScatter(pts)
		if err != nil {
			return fmt.Errorf("%s: %w", id, err)
		}
		sc.GlyphStyle = col
		p.Add(sc)
		p.Legend.Add(label, sc)
		return nil
	}
	if err := add(n, tg, draw.GlyphStyle{Color: lineColors[f], Radius: vg.Points(1), Shape: draw.CircleGlyph{}}, "rolling"); err != nil {
		return err
	}
	if err := add(ns, ts, draw.GlyphStyle{Color: severityColor("trip"), Radius: vg.Points(2.2), Shape: draw.CrossGlyph{}}, "sliding"); err != nil {
		return err
	}
	p.X.Min, p.X.Max = 0, math.Max(nmax, 1)*1.05
	// The T range is set by the data (and the narrowest cone, so at least
	// one pair of edges shows), not by the widest cone at the largest
	// impact load, which would squeeze the walking forces into a line.
	ext := 1.3 * math.Max(math.Abs(ylo), math.Abs(yhi))
	if len(mus) > 0 {
		ext = math.Max(ext, 1.1*mus[0]*nmax)
	}
	ext = math.Max(ext, 1)
	p.Y.Min, p.Y.Max = -ext, ext
	p.Legend.Top, p.Legend.Left = true, true
	p.Legend.XOffs = vg.Points(6)
	caption := fmt.Sprintf("Each tick the %s foot touched the ground, as a point (N, T); %d point(s) drawn of %d in contact, keeping the extremes. "+
		"The dashed lines are the cone's edges T = ±μs·N of each ground the walker met: a rolling foot inside its cone holds; crosses are ticks the foot was sliding.",
		footNames[f], drawn, len(n)+len(ns))
	return fs.add(p, halfW, halfH, id, title, caption, true)
}

// utilizationFigure: friction utilization against the slip limit 1.0,
// with slip episodes shaded from each foot's contact mode and the demands
// events report (a slipping heel strike's impulse ratio over μs) marked.
func utilizationFigure(fs *figureSet, v *view) error {
	tlo, thi := span(v.t)
	title := "Friction utilization |T| / (μs·N)"
	p, st, err := linePlot(title, "time (s)", "utilization", []line{
		{label: "left foot", x: v.t, y: v.feet[0].util, color: colLeft},
		{label: "right foot", x: v.t, y: v.feet[1].util, color: colRight, dashed: true},
		{label: "slip limit 1.0", x: []float64{tlo, thi}, y: []float64{1, 1}, color: colLimit, dashed: true, width: vg.Points(1.2)},
	}, fs.max, marksFor(v, 0, 1))
	if err != nil {
		return err
	}
	ymax := 1.1
	for f := 0; f < 2; f++ {
		var pts plotter.XYs
		for _, d := range v.demands {
			if d.foot == f || (f == 0 && d.foot < 0) {
				pts = append(pts, plotter.XY{X: d.t, Y: d.demand})
				ymax = math.Max(ymax, d.demand*1.1)
			}
		}
		if len(pts) == 0 {
			continue
		}
		sc, err := plotter.NewScatter(pts)
		if err != nil {
			return fmt.Errorf("utilization demands: %w", err)
		}
		sc.GlyphStyle = draw.GlyphStyle{Color: lineColors[f], Radius: vg.Points(3.5), Shape: draw.PyramidGlyph{}}
		p.Add(sc)
		p.Legend.Add(footNames[f]+": event demand", sc)
	}
	p.Y.Min = math.Min(p.Y.Min, 0)
	p.Y.Max = math.Max(p.Y.Max, ymax)
	roomForStrips(p, v, figH)
	slips := len(v.slips[0]) + len(v.slips[1])
	caption := fmt.Sprintf("Above 1.0 the static friction cannot hold the foot. %d slip episode(s) shaded where the foot's contact mode was sliding, read from the mode column whatever a row records as a sliding foot's utilization; triangles mark %d demand(s) the events report beyond the rows (a slipping heel strike's impulse ratio over μs, a friction-limit alarm's utilization). ",
		slips, len(v.demands))
	return fs.add(p, figW, figH, "plot-utilization", title, caption+st.caption(), false)
}

// copFigure: the centre of pressure along each foot while it is down.
func copFigure(fs *figureSet, v *view) error {
	_, err := fs.timePlot(v, "plot-cop", "Centre of pressure along the foot", "arc length (m)",
		"Arc length from the point under the leg axis to the contact, positive toward the toe, while the foot is on the ground; breaks are swings. A centre of pressure that reaches the end of the foot's arc means the foot is about to roll over its edge.",
		[]line{
			{label: "left foot", x: v.t, y: v.feet[0].cop, color: colLeft},
			{label: "right foot", x: v.t, y: v.feet[1].cop, color: colRight, dashed: true},
		}, shortH)
	return err
}

// phaseFigures: each joint's angle against its rate. A periodic gait
// draws a closed loop per stride; a disturbance shows as a loop that
// leaves the bundle and comes back (or does not).
func phaseFigures(fs *figureSet, v *view) error {
	for i, j := range v.joints {
		id := fmt.Sprintf("plot-phase-%d", i)
		title := "Phase portrait, " + j.name
		p := newPlot(title, "angle (rad)", "rate (rad/s)")
		runs, kept, finite := thinPath(j.angle, j.rate, fs.max)
		if kept > 0 {
			p.Add(&brokenLine{runs: runs, style: draw.LineStyle{Color: lineColors[i%len(lineColors)], Width: vg.Points(0.6)}})
		}
		thin := fmt.Sprintf("Every one of the %d samples drawn.", finite)
		if kept < finite {
			thin = fmt.Sprintf("Thinned for drawing: %d of %d samples, each kept point at least a small fraction of the plot's span from the one before, so every turn of the curve is kept.", kept, finite)
		}
		var start, end plotter.XYs
		for k := range j.angle {
			if finitePoint(j.angle, j.rate, k) {
				start = append(start, plotter.XY{X: j.angle[k], Y: j.rate[k]})
				break
			}
		}
		for k := len(j.angle) - 1; k >= 0; k-- {
			if finitePoint(j.angle, j.rate, k) {
				end = append(end, plotter.XY{X: j.angle[k], Y: j.rate[k]})
				break
			}
		}
		for _, m := range []struct {
			pts   plotter.XYs
			shape draw.GlyphDrawer
			label string
		}{{start, draw.CircleGlyph{}, "start"}, {end, draw.BoxGlyph{}, "end"}} {
			if len(m.pts) == 0 {
				continue
			}
			sc, err := plotter.NewScatter(m.pts)
			if err != nil {
				return fmt.Errorf("%s: %w", id, err)
			}
			sc.GlyphStyle = draw.GlyphStyle{Color: colBody, Radius: vg.Points(3), Shape: m.shape}
			p.Add(sc)
			p.Legend.Add(m.label, sc)
		}
		if err := fs.add(p, halfW, halfH, id, title,
			"Encoder angle against encoder rate over the whole run, as the firmware read them; circle: first tick, square: last. "+thin, true); err != nil {
			return err
		}
	}
	return nil
}

// alarmFigure: one row per alarm kind over the telemetry's time span
// widened to every alarm (a run whose telemetry is lost still shows when
// alarms came), with the same marks as the time plots.
func alarmFigure(fs *figureSet, v *view) error {
	tlo, thi := span(v.t)
	alo, ahi := tlo, thi
	if len(v.t) == 0 && len(v.alarms) > 0 {
		alo, ahi = math.Inf(1), math.Inf(-1)
	}
	for _, a := range v.alarms {
		if !math.IsNaN(a.t) && !math.IsInf(a.t, 0) {
			alo, ahi = math.Min(alo, a.t), math.Max(ahi, a.t)
		}
	}
	if alo > ahi {
		alo, ahi = tlo, thi
	}
	p, err := alarmTimeline(v.alarms, alo, ahi, marksFor(v, 0, 1))
	if err != nil {
		return err
	}
	rows := map[string]bool{}
	for _, a := range v.alarms {
		rows[a.kind] = true
	}
	ah := vg.Length(90 + 22*len(rows))
	if err := fs.add(p, figW, ah, "plot-alarms", "Alarm timeline",
		fmt.Sprintf("%d alarm(s) and event(s) of %d kind(s); one row per kind, marker colour by severity. ", len(v.alarms), len(rows)), false); err != nil {
		return err
	}
	fs.figs[len(fs.figs)-1].Legend = severityLegend(v.alarms)
	return nil
}

// stickFigure: the walker at each heel strike.
func stickFigure(fs *figureSet, v *view) error {
	idx := pickEvenly(len(v.poses), maxStickFigures)
	sel := make([]stickPose, 0, len(idx))
	for _, i := range idx {
		sel = append(sel, v.poses[i])
	}
	p, sw, sh, err := stickFigurePlot(sel)
	if err != nil {
		return err
	}
	capText := fmt.Sprintf("Pose at each heel strike, true proportions, each figure shifted so its lower foot sits on its own ground line (drawn at the local slope); curved feet drawn as arcs of the recorded foot radius. %d of %d heel strikes shown", len(sel), v.stepsTotal)
	if len(sel) > 0 && sel[0].belt != nil {
		capText = fmt.Sprintf("Pose at each heel strike on the treadmill, true proportions, each figure at its place on the belt, which is drawn whole with a roller at each end; curved feet drawn as arcs of the recorded foot radius. %d of %d heel strikes shown", len(sel), v.stepsTotal)
	}
	if len(sel) < v.stepsTotal {
		capText += ", evenly spaced, first and last included"
	}
	return fs.add(p, sw, sh, "plot-heel-strikes", "Walker at each heel strike", capText+".", false)
}

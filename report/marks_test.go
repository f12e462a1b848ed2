package report

import (
	"math"
	"math/rand"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"testing"

	"gaitrig/record"
	"gaitrig/scenarios"
)

// TestSegmentBoundariesFromTelemetry checks the segment marks against the
// moment the synthetic walker's stance foot first reached each segment,
// found here from the stance column and the stance foot's contact point
// (the report itself reads the contact modes), and checks the page writes
// each mark's μs and slope on the plots.
func TestSegmentBoundariesFromTelemetry(t *testing.T) {
	r := makeSynthRun(synthOpts{durationS: 8, hz: 1000, patchMu: 0.15})
	v := viewOf(&r.m, &sliceTicks{ticks: r.ticks}, r.steps, r.events, &r.sum)

	// Independent: the segments start at x = 2.4 m and 3.6 m (synthPatch0,
	// synthPatch1); the first tick whose stance contact is at or past
	// each is the boundary.
	starts := []float64{synthPatch0, synthPatch1}
	var want []float64
	for _, x0 := range starts {
		for _, tk := range r.ticks {
			if tk.Feet[tk.Stance].ContactX >= x0 {
				want = append(want, tk.T)
				break
			}
		}
	}
	if len(want) != 2 {
		t.Fatalf("the synthetic walk reaches %d of 2 segment starts; make it longer", len(want))
	}
	if len(v.segMarks) != len(want) {
		t.Fatalf("%d segment marks, want %d", len(v.segMarks), len(want))
	}
	wantMu := []float64{0.15, synthMuS}
	wantSlope := []float64{0, synthSlope2}
	for i, m := range v.segMarks {
		if m.t != want[i] || m.index != i+1 || m.seg.muS != wantMu[i] || m.seg.slope != wantSlope[i] {
			t.Errorf("mark %d: t %g seg %d μs %g slope %g; want t %g seg %d μs %g slope %g",
				i, m.t, m.index, m.seg.muS, m.seg.slope, want[i], i+1, wantMu[i], wantSlope[i])
		}
	}

	dir := filepath.Join(t.TempDir(), "run")
	writeSynthFolder(t, dir, r, true)
	p := renderAndParse(t, dir)
	for _, id := range []string{"plot-joint-angles", "plot-utilization", "plot-energy", "plot-alarms"} {
		for _, label := range []string{"seg 1: μs 0.15, 0°", "seg 2: μs 0.6, -1.719°"} {
			if !strings.Contains(p.texts[id], label) {
				t.Errorf("%s lacks the segment label %q", id, label)
			}
		}
	}
	if !strings.Contains(p.texts["marks-key"], "terrain segment") {
		t.Errorf("marks key %q does not explain the segment lines", p.texts["marks-key"])
	}
}

// TestSegmentEntriesSkipsAndStops covers a foot that lands beyond a short
// segment (both segments are marked at that tick), a walk that never
// reaches the last segment, and a foot in the air that is ignored.
func TestSegmentEntriesSkipsAndStops(t *testing.T) {
	segs := []terrainSeg{{x0: -10, x1: 1}, {x0: 1, x1: 1.1}, {x0: 1.1, x1: 5}, {x0: 5, x1: 9}}
	tt := []float64{0, 1, 2, 3}
	cx := [2][]float64{{0.5, 0.5, 1.3, 1.3}, {3, 6, 0.9, 0.9}}
	mode := [2][]int{{1, 1, 1, 1}, {0, 0, 1, 1}} // right foot in the air at t 0 and 1
	got := segmentEntries(segs, tt, cx, mode, 0)
	if len(got) != 2 || got[0].t != 2 || got[0].index != 1 || got[1].t != 2 || got[1].index != 2 {
		t.Errorf("got %+v; want segments 1 and 2 both entered at t = 2 and segment 3 never", got)
	}
	if got := segmentEntries(segs[:1], tt, cx, mode, 0); got != nil {
		t.Errorf("one segment gave marks %+v", got)
	}
}

// TestSlipWindowsMatchTheModeColumn compares the slip episodes with runs of
// sliding ticks counted the other way round: from the transitions into and
// out of the sliding code.
func TestSlipWindowsMatchTheModeColumn(t *testing.T) {
	rng := rand.New(rand.NewSource(3))
	const sliding = 2
	for trial := 0; trial < 50; trial++ {
		n := 1 + rng.Intn(300)
		tt := make([]float64, n)
		mode := make([]int, n)
		for i := range mode {
			tt[i] = float64(i) * 0.001
			if i > 0 && rng.Float64() < 0.85 {
				mode[i] = mode[i-1]
			} else {
				mode[i] = rng.Intn(3)
			}
		}
		var want []window
		for i := range mode {
			begins := mode[i] == sliding && (i == 0 || mode[i-1] != sliding)
			ends := mode[i] == sliding && (i == n-1 || mode[i+1] != sliding)
			if begins {
				want = append(want, window{from: tt[i]})
			}
			if ends {
				want[len(want)-1].until = tt[i]
			}
		}
		got := slipWindows(tt, mode, sliding)
		if len(got) != len(want) {
			t.Fatalf("trial %d: %d episodes, want %d", trial, len(got), len(want))
		}
		for i := range got {
			if got[i].from != want[i].from || got[i].until != want[i].until {
				t.Fatalf("trial %d, episode %d: [%g, %g], want [%g, %g]", trial, i, got[i].from, got[i].until, want[i].from, want[i].until)
			}
		}
	}
	if got := slipWindows([]float64{0, 1}, []int{2, 2}, -1); got != nil {
		t.Errorf("a manifest without a sliding code gave episodes %+v", got)
	}
}

// TestSlipsShadedOnTheUtilizationPlot makes the synthetic right foot slide
// for two stretches and checks the page counts them and labels the bands.
func TestSlipsShadedOnTheUtilizationPlot(t *testing.T) {
	r := makeSynthRun(synthOpts{durationS: 3, hz: 500, patchMu: 0.6})
	slid := 0
	for i := range r.ticks {
		if (i >= 100 && i < 110) || (i >= 700 && i < 703) {
			r.ticks[i].Feet[1].Mode = 2
			slid++
		}
	}
	dir := filepath.Join(t.TempDir(), "run")
	writeSynthFolder(t, dir, r, true)
	p := renderAndParse(t, dir)
	if c := p.texts["fig-plot-utilization"]; !strings.Contains(c, "2 slip episode(s) shaded") {
		t.Errorf("utilization caption %q: want 2 slip episodes", c)
	}
	if n := strings.Count(p.texts["plot-utilization"], "slip right"); n != 2 {
		t.Errorf("utilization plot labels %d bands slip right, want 2", n)
	}
	if strings.Contains(p.texts["plot-joint-angles"], "slip right") {
		t.Error("the angle plot shades slips; only the friction plots should")
	}
}

// TestPushWindows reads pushes from the push columns.
func TestPushWindows(t *testing.T) {
	tt := []float64{0, 1, 2, 3, 4, 5, 6}
	px := []float64{0, 5, 5, 0, 0, 0, 0}
	py := []float64{0, 0, 0, 0, -2, 0, math.NaN()}
	got := pushWindows(tt, px, py)
	want := []window{{from: 1, until: 2, label: "push"}, {from: 4, until: 4, label: "push"}}
	if len(got) != len(want) {
		t.Fatalf("got %+v, want %+v", got, want)
	}
	for i := range got {
		if got[i] != want[i] {
			t.Errorf("window %d %+v, want %+v", i, got[i], want[i])
		}
	}
}

// TestFaultWindowsFromScenarioText reads the faults of a built-in
// scenario's text, with a freeze fault added, as the manifest carries it.
func TestFaultWindowsFromScenarioText(t *testing.T) {
	text, err := scenarios.BuiltinText("latency-stress")
	if err != nil {
		t.Fatal(err)
	}
	s := strings.Replace(string(text), "faults:\n", "faults:\n  - kind: freeze\n    sensor: imu\n    at_s: 1.5\n    for_s: 0.25\n", 1)
	got, note := faultWindows("latency-stress", s, 9.5)
	if note != "" {
		t.Fatalf("note %q", note)
	}
	// From the text: freeze at 1.5 s for 0.25 s; latency from 0 to the
	// end; drop from 2 s to the end.
	want := []window{{1.5, 1.75, "freeze imu"}, {0, 9.5, "latency"}, {2, 9.5, "drop"}}
	if len(got) != len(want) {
		t.Fatalf("got %+v, want %+v", got, want)
	}
	for i := range got {
		if got[i] != want[i] {
			t.Errorf("window %d %+v, want %+v", i, got[i], want[i])
		}
	}

	push, err := scenarios.BuiltinText("push-recovery")
	if err != nil {
		t.Fatal(err)
	}
	if got, note := faultWindows("push-recovery", string(push), 12); len(got) != 0 || note != "" {
		t.Errorf("push-recovery: windows %+v, note %q; pushes come from the telemetry, not the text", got, note)
	}
	for _, bad := range []string{"", "name: [unclosed\n"} {
		got, note := faultWindows("x", bad, 1)
		if got != nil || note == "" {
			t.Errorf("text %q: windows %+v, note %q; want none and a note", bad, got, note)
		}
	}
}

// TestDemandsOf reads friction demands from events.
func TestDemandsOf(t *testing.T) {
	evs := []record.Event{
		{T: 4.374, Kind: "impact_slip", Foot: "right", Values: map[string]float64{"value": 0.2530658704486578, "limit": 0.25}},
		{T: 5, Kind: "friction_limit", Foot: "left", Values: map[string]float64{"value": 1.31, "limit": 0.8}},
		{T: 6, Kind: "run_end", Severity: record.Info, Values: map[string]float64{"value": 3}},
		{T: 7, Kind: "impact_slip", Values: map[string]float64{"value": 0.3}}, // no limit: cannot be placed
	}
	got := demandsOf(evs)
	want := []demandMark{{4.374, 1, 0.2530658704486578 / 0.25}, {5, 0, 1.31}}
	if len(got) != len(want) {
		t.Fatalf("got %+v, want %+v", got, want)
	}
	for i := range got {
		if got[i] != want[i] {
			t.Errorf("demand %d %+v, want %+v", i, got[i], want[i])
		}
	}
}

// TestECDF checks the latency distribution against sorted samples: the
// nearest-rank quantiles, and every drawn corner's fraction counted by
// brute force.
func TestECDF(t *testing.T) {
	rng := rand.New(rand.NewSource(11))
	var v []float64
	for i := 0; i < 5000; i++ {
		x := 4000 + 2000*rng.Float64()
		if i%7 == 0 {
			x = math.Round(x / 100) // ties
		}
		v = append(v, x)
	}
	v = append(v, 97911, math.NaN(), 0, -3, math.Inf(1)) // one spike, and what is not a sample
	e, dropped := newECDF(v)
	if dropped != 3 {
		t.Errorf("dropped %d, want 3 (zero, negative, infinite)", dropped)
	}
	s := make([]float64, 0, len(v))
	for _, x := range v {
		if x > 0 && !math.IsInf(x, 0) {
			s = append(s, x)
		}
	}
	sort.Float64s(s)
	count := func(x float64) int { return sort.Search(len(s), func(i int) bool { return s[i] > x }) }
	for _, q := range []float64{0.01, 0.5, 0.9, 0.99, 0.999, 1} {
		// The smallest sample with at least a fraction q at or below it.
		want := math.NaN()
		for _, x := range s {
			if float64(count(x)) >= q*float64(len(s)) {
				want = x
				break
			}
		}
		if got := e.quantile(q); got != want {
			t.Errorf("quantile %g = %g, want %g", q, got, want)
		}
	}
	for _, budget := range []int{50, 2000, 100000} {
		x, p := e.points(budget)
		if x[0] != s[0] || x[len(x)-1] != s[len(s)-1] || p[len(p)-1] != 1 {
			t.Errorf("budget %d: ends (%g, %g), want smallest %g and largest %g at 1", budget, x[0], x[len(x)-1], s[0], s[len(s)-1])
		}
		if len(x) > budget+1 {
			t.Errorf("budget %d: %d corners", budget, len(x))
		}
		for i := range x {
			if want := float64(count(x[i])) / float64(len(s)); p[i] != want {
				t.Fatalf("budget %d: corner %d at %g has fraction %g, want %g", budget, i, x[i], p[i], want)
			}
			if i > 0 && !(x[i] > x[i-1] && p[i] > p[i-1]) {
				t.Fatalf("budget %d: corners %d and %d not increasing", budget, i-1, i)
			}
		}
	}
	if q := (ecdf{}).quantile(0.5); !math.IsNaN(q) {
		t.Errorf("empty distribution quantile %g, want NaN", q)
	}
}

// TestLatencyDistributionFigure renders a wall-clock run with one long
// spike and checks the distribution plot's figures against the telemetry
// column and that the scenario's limit is drawn.
func TestLatencyDistributionFigure(t *testing.T) {
	r := makeSynthRun(synthOpts{durationS: 4, hz: 1000, patchMu: 0.6})
	r.m.Clock = "wallclock"
	var s []float64
	for i := range r.ticks {
		if i%3 == 2 {
			continue
		}
		x := 4000 + float64((i*37)%2000)
		if i == 1500 {
			x = 97911
		}
		r.ticks[i].LatencyUS = x
		s = append(s, x)
	}
	r.sum.LatencyUS = &record.Latency{P50: 5000, P99: 6000, Max: 97911}
	r.sum.Criteria = append(r.sum.Criteria, record.Criterion{Name: "max_latency_p99_us", Pass: true, Value: 6000, Limit: 10000})
	sort.Float64s(s)
	rank := func(q float64) float64 { return s[int(math.Ceil(q*float64(len(s))))-1] }

	dir := filepath.Join(t.TempDir(), "run")
	writeSynthFolder(t, dir, r, true)
	p := renderAndParse(t, dir)
	checkPlots(t, p, latencyPlotID, latencyCDFID, latencyTailID)
	c := p.texts["fig-"+latencyCDFID]
	for _, w := range []string{
		"distribution of the " + strconv.Itoa(len(s)) + " measured",
		"p50 " + FormatNumber(rank(0.5)) + " µs", "p99 " + FormatNumber(rank(0.99)) + " µs", "max 97911 µs",
	} {
		if !strings.Contains(c, w) {
			t.Errorf("distribution caption %q lacks %q", c, w)
		}
	}
	slower := 0
	for _, x := range s {
		if x > 10000 {
			slower++
		}
	}
	if c := p.texts["fig-"+latencyTailID]; !strings.Contains(c, strconv.Itoa(slower)+" command(s) were slower than the limit of 10000 µs") {
		t.Errorf("tail caption %q: want %d slower than the limit", c, slower)
	}
	for _, id := range []string{latencyCDFID, latencyPlotID, latencyTailID} {
		if !strings.Contains(p.texts[id], "p99 limit 10000 µs") {
			t.Errorf("%s does not draw the p99 limit", id)
		}
		if !strings.Contains(p.texts[id], "log scale") {
			t.Errorf("%s is not on a log axis", id)
		}
	}
}

// TestEnergySeries checks the energy plot's data against the rows: the
// kinetic energy as recorded, the potential and total less their first
// values.
func TestEnergySeries(t *testing.T) {
	r := makeSynthRun(synthOpts{durationS: 2, hz: 500, patchMu: 0.6})
	v := viewOf(&r.m, &sliceTicks{ticks: r.ticks}, r.steps, r.events, &r.sum)
	k, dp, dt, p0, e0 := energySeries(v.kinetic, v.potential)
	first := r.ticks[0]
	if p0 != first.Potential || e0 != first.Kinetic+first.Potential {
		t.Errorf("offsets %g, %g; want %g, %g", p0, e0, first.Potential, first.Kinetic+first.Potential)
	}
	for i, tk := range r.ticks {
		if k[i] != tk.Kinetic || math.Abs(dp[i]-(tk.Potential-first.Potential)) > 1e-12 ||
			math.Abs(dt[i]-(tk.Kinetic+tk.Potential-first.Kinetic-first.Potential)) > 1e-12 {
			t.Fatalf("tick %d: (%g, %g, %g) disagrees with the row", i, k[i], dp[i], dt[i])
		}
	}
}

// TestBodySeriesFromRows checks the hip, torso and centre-of-pressure
// series are the rows' columns, with no centre of pressure in the air.
func TestBodySeriesFromRows(t *testing.T) {
	r := makeSynthRun(synthOpts{durationS: 2, hz: 500, patchMu: 0.6, withTorso: true})
	v := viewOf(&r.m, &sliceTicks{ticks: r.ticks}, r.steps, r.events, &r.sum)
	if v.torso == nil {
		t.Fatal("a walker with a torso has no torso series")
	}
	for i, tk := range r.ticks {
		if v.hipY[i] != tk.Q[1] || v.hipVX[i] != tk.V[0] || v.torso[i] != tk.Q[4] {
			t.Fatalf("tick %d: hip or torso series disagrees with the row", i)
		}
		for f := 0; f < 2; f++ {
			free := tk.Feet[f].Mode == 0
			if free != math.IsNaN(v.feet[f].cop[i]) || (!free && v.feet[f].cop[i] != tk.Feet[f].CoP) {
				t.Fatalf("tick %d foot %d: CoP %g, row %g (mode %d)", i, f, v.feet[f].cop[i], tk.Feet[f].CoP, tk.Feet[f].Mode)
			}
			if free != math.IsNaN(v.feet[f].util[i]) {
				t.Fatalf("tick %d foot %d: utilization %g drawn for mode %d", i, f, v.feet[f].util[i], tk.Feet[f].Mode)
			}
		}
	}
	noTorso := makeSynthRun(synthOpts{durationS: 1, hz: 500, patchMu: 0.6})
	if v := viewOf(&noTorso.m, &sliceTicks{ticks: noTorso.ticks}, nil, nil, nil); v.torso != nil {
		t.Error("a compass walker got a torso series")
	}
}

// TestThinPath checks the phase portrait's thinning keeps both ends,
// meets its budget and never strays far from the curve.
func TestThinPath(t *testing.T) {
	n := 20000
	x, y := make([]float64, n), make([]float64, n)
	for i := range x {
		a := 40 * math.Pi * float64(i) / float64(n) // twenty loops
		x[i], y[i] = math.Cos(a)*(1+0.01*float64(i%3)), 5*math.Sin(a)
	}
	x[500] = math.NaN() // splits the curve
	runs, kept, finite := thinPath(x, y, 2000)
	if finite != n-1 || kept > 2000 || kept < 200 || len(runs) != 2 {
		t.Fatalf("kept %d of %d finite in %d runs", kept, finite, len(runs))
	}
	if runs[0].x[0] != x[0] || runs[1].x[len(runs[1].x)-1] != x[n-1] || runs[0].x[len(runs[0].x)-1] != x[499] {
		t.Error("ends of the runs not kept")
	}
	// Every sample lies within 5 % of the spans of the last kept point
	// before it (the thinning's eps stays small for a smooth curve).
	kx := append(append([]float64{}, runs[0].x...), runs[1].x...)
	ky := append(append([]float64{}, runs[0].y...), runs[1].y...)
	j := 0
	for i := 0; i < n; i++ {
		if i == 500 {
			continue
		}
		for j+1 < len(kx) && kx[j+1] == x[i] && ky[j+1] == y[i] {
			j++
		}
		if math.Abs(x[i]-kx[j]) > 0.05*2.02 || math.Abs(y[i]-ky[j]) > 0.05*10 {
			t.Fatalf("sample %d (%g, %g) strays from kept point (%g, %g)", i, x[i], y[i], kx[j], ky[j])
		}
	}
	if runs, kept, _ := thinPath(x[:100], y[:100], 2000); kept != 100 || len(runs) != 1 {
		t.Errorf("a short curve was thinned: kept %d", kept)
	}
}

// TestRatesCaptionIsItsOwn: the rates plot once repeated the angle
// caption.
func TestRatesCaptionIsItsOwn(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "run")
	writeSynthFolder(t, dir, makeSynthRun(synthOpts{durationS: 1, hz: 500, patchMu: 0.6}), true)
	p := renderAndParse(t, dir)
	a, r := p.texts["fig-plot-joint-angles"], p.texts["fig-plot-joint-rates"]
	if strings.Contains(r, "child link minus parent link") || !strings.Contains(r, "Rate of each joint angle") {
		t.Errorf("rates caption %q", r)
	}
	if !strings.Contains(a, "child link minus parent link") {
		t.Errorf("angles caption %q", a)
	}
}

// TestPushAndAlarmMarksOnThePage pushes the synthetic walker and checks
// the push band is labelled on the time plots and explained in the key.
func TestPushAndAlarmMarksOnThePage(t *testing.T) {
	r := makeSynthRun(synthOpts{durationS: 5, hz: 500, patchMu: 0.15}) // long enough to slip on the patch
	for i := 600; i < 650; i++ {
		r.ticks[i].Push = [2]float64{100, 0}
	}
	dir := filepath.Join(t.TempDir(), "run")
	writeSynthFolder(t, dir, r, true)
	p := renderAndParse(t, dir)
	for _, id := range []string{"plot-joint-angles", "plot-torques", "plot-hip-speed"} {
		if n := strings.Count(p.texts[id], "push"); n != 1 {
			t.Errorf("%s has %d push labels, want 1", id, n)
		}
	}
	key := p.texts["marks-key"]
	for _, w := range []string{"push", "alarms"} {
		if !strings.Contains(key, w) {
			t.Errorf("marks key %q does not mention %s", key, w)
		}
	}
}

// TestAlarmLines keeps alarms apart by at least the gap per severity and
// leaves out information events.
func TestAlarmLines(t *testing.T) {
	marks := []alarmMark{
		{t: 1, severity: "warn"}, {t: 1.05, severity: "warn"}, {t: 1.05, severity: "trip"},
		{t: 1.2, severity: "warn"}, {t: 2, severity: "info"}, {t: math.NaN(), severity: "warn"},
	}
	got := alarmLines(marks, 0.1)
	want := []alarmLine{{1, "warn"}, {1.05, "trip"}, {1.2, "warn"}}
	if len(got) != len(want) {
		t.Fatalf("got %+v, want %+v", got, want)
	}
	for i := range got {
		if got[i] != want[i] {
			t.Errorf("line %d %+v, want %+v", i, got[i], want[i])
		}
	}
}

// TestMergeWindows joins windows closer than the gap and keeps the rest.
func TestMergeWindows(t *testing.T) {
	ws := []window{{0, 1, "a"}, {1.05, 2, "a"}, {3, 3, "a"}, {3.2, 4, "a"}}
	got := mergeWindows(ws, 0.1)
	want := []window{{0, 2, "a"}, {3, 3, "a"}, {3.2, 4, "a"}}
	if len(got) != len(want) {
		t.Fatalf("got %+v, want %+v", got, want)
	}
	for i := range got {
		if got[i] != want[i] {
			t.Errorf("window %d %+v, want %+v", i, got[i], want[i])
		}
	}
	if got := mergeWindows(ws, 0); len(got) != len(ws) {
		t.Errorf("gap 0 merged %d windows into %d", len(ws), len(got))
	}
}

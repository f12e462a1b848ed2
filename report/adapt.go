package report

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"

	"gaitrig/record"
)

// terrainSeg is one straight piece of ground as the report needs it: its
// horizontal extent, slope and static friction.
type terrainSeg struct {
	x0, x1 float64
	slope  float64 // rad
	muS    float64
}

// terrainOf lays the manifest's terrain out along x for lookups by
// position. It returns nil when the manifest records no plant, or a
// terrain the report cannot place (a segment without a positive length).
func terrainOf(p *record.Plant) []terrainSeg {
	if p == nil || len(p.Terrain.Segments) == 0 {
		return nil
	}
	x := p.Terrain.StartM[0]
	out := make([]terrainSeg, 0, len(p.Terrain.Segments))
	for _, s := range p.Terrain.Segments {
		if !(s.LengthM > 0) {
			return nil
		}
		// The segment length is along the ground; its horizontal extent is
		// length·cos(slope).
		dx := s.LengthM * math.Cos(s.SlopeRad)
		out = append(out, terrainSeg{x0: x, x1: x + dx, slope: s.SlopeRad, muS: s.MuStatic})
		x += dx
	}
	return out
}

// footRadiiOf returns each leg's foot radius from the manifest; zero where
// it is not recorded or not a usable radius.
func footRadiiOf(p *record.Plant) (r [2]float64) {
	if p == nil {
		return r
	}
	for i, l := range p.Legs {
		if v := l.FootRadiusM; v > 0 && !math.IsInf(v, 0) {
			r[i] = v
		}
	}
	return r
}

// segmentAt returns the segment under horizontal position x: the last one
// whose start is at or before x, clamped to the ends (beyond the last
// segment the ground is taken to continue it).
func segmentAt(segs []terrainSeg, x float64) (terrainSeg, bool) {
	if len(segs) == 0 || math.IsNaN(x) {
		return terrainSeg{}, false
	}
	i := sort.Search(len(segs), func(i int) bool { return segs[i].x0 > x }) - 1
	i = max(0, min(i, len(segs)-1))
	return segs[i], true
}

// tickSource is what the report needs of a telemetry stream; a
// *record.TickReader is one.
type tickSource interface {
	Next() bool
	Tick() *record.Tick
}

// sliceTicks streams ticks held in memory.
type sliceTicks struct {
	ticks []record.Tick
	i     int
}

func (s *sliceTicks) Next() bool {
	if s.i >= len(s.ticks) {
		return false
	}
	s.i++
	return true
}

func (s *sliceTicks) Tick() *record.Tick { return &s.ticks[s.i-1] }

// collectTicks pulls the plotted columns out of a telemetry stream, one row
// at a time, so the report never holds whole telemetry rows in memory.
//
// μ_s of each foot comes from the terrain under its contact point; where
// the manifest has no terrain it is recovered from the recorded
// utilization, |T| / (utilization · N), which is exact wherever the foot is
// loaded and pushing sideways. A foot carrying no load has no friction cone
// and gets NaN, which breaks the envelope line over the swing.
//
// sizeHint, when positive, is the expected number of rows (the summary's
// tick count); it saves the slices regrowing through a long run.
func collectTicks(v *view, nj int, src tickSource, segs []terrainSeg, sizeHint int) {
	n := max(sizeHint, 0)
	v.t = make([]float64, 0, n)
	v.latency = make([]float64, 0, n)
	mk := func() []float64 { return make([]float64, 0, n) }
	v.hipY, v.hipVX = mk(), mk()
	v.kinetic, v.potential = mk(), mk()
	v.pushX, v.pushY = mk(), mk()
	if v.torso != nil {
		v.torso = mk()
	}
	v.joints = v.joints[:0]
	for j := 0; j < nj; j++ {
		v.joints = append(v.joints, jointSeries{
			angle: make([]float64, 0, n), rate: make([]float64, 0, n),
			commanded: make([]float64, 0, n), applied: make([]float64, 0, n),
		})
	}
	for k := range v.feet {
		v.feet[k] = footSeries{
			normal: make([]float64, 0, n), tangential: make([]float64, 0, n),
			mu: make([]float64, 0, n), util: make([]float64, 0, n),
			cop: make([]float64, 0, n), contactX: make([]float64, 0, n), mode: make([]int, 0, n),
		}
	}
	for src != nil && src.Next() {
		t := src.Tick()
		v.t = append(v.t, t.T)
		v.belt.speed = append(v.belt.speed, t.BeltSpeed)
		v.latency = append(v.latency, t.LatencyUS)
		v.hipY = append(v.hipY, t.Q[1])
		v.hipVX = append(v.hipVX, t.V[0])
		if v.torso != nil {
			v.torso = append(v.torso, t.Q[4])
		}
		if v.knees != nil {
			v.knees.add(t, v.modeFree)
		}
		v.kinetic = append(v.kinetic, t.Kinetic)
		v.potential = append(v.potential, t.Potential)
		v.pushX = append(v.pushX, t.Push[0])
		v.pushY = append(v.pushY, t.Push[1])
		for j := range v.joints {
			v.joints[j].angle = append(v.joints[j].angle, t.Angle[j])
			v.joints[j].rate = append(v.joints[j].rate, t.Rate[j])
			v.joints[j].commanded = append(v.joints[j].commanded, t.Commanded[j])
			v.joints[j].applied = append(v.joints[j].applied, t.Applied[j])
		}
		for k := range v.feet {
			f := &t.Feet[k]
			fs := &v.feet[k]
			mu := math.NaN()
			switch {
			case f.NormalN == 0 && f.TangentialN == 0:
			case len(segs) > 0:
				if sg, ok := segmentAt(segs, f.ContactX); ok {
					mu = sg.muS
				}
			case f.Utilization > 0 && f.NormalN > 0 && f.TangentialN != 0:
				mu = math.Abs(f.TangentialN) / (f.Utilization * f.NormalN)
			}
			fs.normal = append(fs.normal, f.NormalN)
			fs.tangential = append(fs.tangential, f.TangentialN)
			util := f.Utilization
			if f.Mode == v.modeFree {
				// A foot in the air has no friction to use; its row says
				// 0, which would draw a line along the axis all swing.
				util = math.NaN()
			}
			fs.util = append(fs.util, util)
			fs.mu = append(fs.mu, mu)
			cop := f.CoP
			if f.Mode == v.modeFree {
				cop = math.NaN() // a foot in the air has no centre of pressure
			}
			fs.cop = append(fs.cop, cop)
			fs.contactX = append(fs.contactX, f.ContactX)
			fs.mode = append(fs.mode, f.Mode)
		}
	}
}

// viewOf turns the parts of a run folder into what the page shows.
func viewOf(m *record.Manifest, ticks tickSource, steps []record.Step, events []record.Event, s *record.Summary) *view {
	v := &view{
		Scenario: m.Scenario,
		Hash:     m.ScenarioHash,
		Greeting: greetingText(m.Greeting),
		Caution:  record.Caution,
	}
	if v.Scenario == "" {
		v.Scenario = "(unnamed scenario)"
	}
	if v.Hash == "" {
		v.Hash = "(not recorded)"
	}
	v.Meta = []kv{
		{"scenario file", m.ScenarioFile},
		{"link", m.Link},
		{"clock", m.Clock},
		{"tick rate", fmtFloat(m.TickHz) + " Hz"},
		{"seed", strconv.FormatInt(m.Seed, 10)},
		{"tool version", m.ToolVersion},
		{"host", m.Host},
	}
	if !m.StartTime.IsZero() {
		v.Meta = append(v.Meta, kv{"started", m.StartTime.UTC().Format("2006-01-02 15:04:05 MST")})
	}
	for i := range v.Meta {
		if strings.TrimSpace(v.Meta[i].Value) == "" {
			v.Meta[i].Value = "(not recorded)"
		}
	}

	if s == nil {
		v.Outcome = "unfinished"
		v.Headline = append(v.Headline, kv{"summary", "missing: the run did not finish (killed, or still running); the plots show what was recorded up to the last flush"})
	} else {
		v.Outcome = string(s.Outcome)
		if s.Reason != "" {
			v.Headline = append(v.Headline, kv{"reason", s.Reason})
		}
		v.Headline = append(v.Headline,
			kv{"heel strikes", strconv.Itoa(s.Steps)},
			kv{"ticks", strconv.FormatInt(s.Ticks, 10)},
			kv{"simulated time", fmtFloat(s.SimTimeS) + " s"},
			kv{"wall time", fmtFloat(s.WallTimeS) + " s"},
			kv{"mean speed", fmtFloat(s.MeanSpeedMPS) + " m/s"},
			kv{"peak friction utilization", fmtFloat(s.PeakFrictionUtilization)},
			kv{"least normal force", fmtFloat(s.MinNormalForceN) + " N"},
		)
		if s.LatencyUS != nil {
			v.Headline = append(v.Headline, kv{"round-trip latency p50 / p99 / max",
				fmt.Sprintf("%s / %s / %s µs", fmtFloat(s.LatencyUS.P50), fmtFloat(s.LatencyUS.P99), fmtFloat(s.LatencyUS.Max))})
		} else {
			v.Headline = append(v.Headline, kv{"round-trip latency", "not measured (lockstep clock)"})
		}
		if s.JitterUS != nil {
			v.Headline = append(v.Headline, kv{"tick jitter p50 / p99 / max",
				fmt.Sprintf("%s / %s / %s µs", fmtFloat(s.JitterUS.P50), fmtFloat(s.JitterUS.P99), fmtFloat(s.JitterUS.Max))})
		}
		v.Headline = append(v.Headline, kv{"deadline misses", strconv.Itoa(s.DeadlineMisses)})
		for _, c := range s.Criteria {
			v.Criteria = append(v.Criteria, criterionRow{Name: c.Name, Pass: c.Pass, Value: fmtFloat(c.Value), Limit: fmtFloat(c.Limit)})
		}
		kinds := make([]string, 0, len(s.Alarms))
		for k := range s.Alarms {
			kinds = append(kinds, k)
		}
		sort.Strings(kinds)
		for _, k := range kinds {
			v.AlarmCounts = append(v.AlarmCounts, kv{k, strconv.Itoa(s.Alarms[k])})
		}
	}

	// Telemetry columns.
	nj := min(len(m.JointNames), record.MaxJoints)
	segs := terrainOf(m.Plant)
	hint := 0
	if s != nil && s.Ticks > 0 && s.Ticks < 1<<26 {
		hint = int(s.Ticks)
	}
	v.modeFree = modeCode(m.FootModes, "free")
	v.modeSliding = modeCode(m.FootModes, "sliding")
	if m.NumQ >= 5 && (m.Plant == nil || m.Plant.Torso != nil) {
		// q4 is the torso's absolute angle (the plant's link order: left,
		// right, torso); an empty, non-nil slice asks collectTicks for it.
		v.torso = []float64{}
	}
	v.knees = kneesOf(m)
	v.latencyLimit = math.NaN()
	if s != nil {
		for _, c := range s.Criteria {
			if c.Name == latencyCriterion {
				v.latencyLimit = c.Limit
			}
		}
	}
	collectTicks(v, nj, ticks, segs, hint)
	for j := range v.joints {
		v.joints[j].name = m.JointNames[j]
	}
	if len(segs) > 0 {
		v.Notes = append(v.Notes, "μs of the friction-cone lines is the static friction of the terrain segment under each foot's contact point, from the manifest's terrain.")
	} else {
		v.Notes = append(v.Notes, "The manifest has no terrain: μs of the friction-cone lines is recovered from the recorded utilization as |T| / (utilization · N), and is not drawn where the foot carries no sideways force.")
	}

	// Alarms and events.
	v.ScenarioText = m.ScenarioText
	v.belt.on = hasBelt(m.Plant)
	for _, e := range events {
		v.belt.event(&e)
		v.alarms = append(v.alarms, alarmMark{t: e.T, kind: e.Kind, severity: string(e.Severity)})
		if e.Severity == record.Info {
			continue
		}
		if len(v.AlarmRows) >= maxAlarmRows {
			v.AlarmRowsCut++
			continue
		}
		v.AlarmRows = append(v.AlarmRows, alarmRow{T: fmtFloat(e.T), Kind: e.Kind, Severity: string(e.Severity), Foot: e.Foot, Message: e.Message})
	}
	v.demands = demandsOf(events)

	// What happened when, for the marks on every time axis.
	var cx [2][]float64
	var modes [2][]int
	for f := range v.feet {
		cx[f], modes[f] = v.feet[f].contactX, v.feet[f].mode
		v.slips[f] = slipWindows(v.t, v.feet[f].mode, v.modeSliding)
	}
	v.segMarks = segmentEntries(segs, v.t, cx, modes, v.modeFree)
	v.pushes = pushWindows(v.t, v.pushX, v.pushY)
	tlo, thi := span(v.t)
	var note string
	v.faults, note = faultWindows(v.Scenario, m.ScenarioText, thi)
	if note != "" {
		v.Notes = append(v.Notes, note)
	}
	v.alarmLines = alarmLines(v.alarms, (thi-tlo)/400)
	v.markGap = (thi - tlo) / 1500

	// Steps: table and poses.
	v.StepCols = []string{"step", "stance", "start (s)", "duration (s)", "length (m)", "speed (m/s)",
		"peak friction utilization", "least normal force (N)", "heel-strike loss (J)",
		"positive work (J)", "negative work (J)", "cost of transport", "CoP travel (m)"}
	v.stepsTotal = len(steps)
	radii := footRadiiOf(m.Plant)
	belt := beltEndsOf(m.Plant) // nil on fixed ground
	for _, st := range steps {
		v.StepRows = append(v.StepRows, []string{
			strconv.Itoa(st.Index), footName(st.Stance), fmtFloat(st.StartS), fmtFloat(st.DurationS),
			fmtFloat(st.LengthM), fmtFloat(st.SpeedMPS), fmtFloat(st.PeakUtilization), fmtFloat(st.MinNormalN),
			fmtFloat(st.ImpactLossJ), fmtFloat(st.PosWorkJ), fmtFloat(st.NegWorkJ), fmtFloat(st.CostOfTransport),
			fmtFloat(st.CoPTravelM),
		})
		ps := stickPose{
			label:    fmt.Sprintf("#%d  %.2f s", st.Index, st.EndS),
			hip:      st.Pose.Hip,
			feet:     st.Pose.Feet,
			torsoTop: st.Pose.TorsoTop,
			hasTorso: st.Pose.HasTorso,
			radius:   radii,
			belt:     belt,
		}
		if v.knees != nil {
			v.knees.place(&ps, v.t, st.EndS)
		}
		if !poseFinite(ps) {
			// A pose with a NaN in it (a run that went non-finite) cannot be
			// drawn; the step stays in the table.
			continue
		}
		low := ps.feet[0]
		if ps.feet[1][1] < low[1] {
			low = ps.feet[1]
		}
		if sg, ok := segmentAt(segs, low[0]); ok {
			ps.slope = sg.slope
		}
		v.poses = append(v.poses, ps)
	}
	return v
}

// poseFinite reports whether every coordinate of ps is a finite number.
func poseFinite(ps stickPose) bool {
	vals := []float64{ps.hip[0], ps.hip[1], ps.feet[0][0], ps.feet[0][1], ps.feet[1][0], ps.feet[1][1]}
	if ps.hasTorso {
		vals = append(vals, ps.torsoTop[0], ps.torsoTop[1])
	}
	for _, x := range vals {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return false
		}
	}
	return true
}

func footName(i int) string {
	if i == 0 || i == 1 {
		return footNames[i]
	}
	return strconv.Itoa(i)
}

// greetingText prints the firmware greeting on one line.
func greetingText(g record.Greeting) string {
	if g == (record.Greeting{}) {
		return "(no greeting received)"
	}
	return fmt.Sprintf("%s build %s, protocol %d, %d actuator(s)", g.Name, g.Build, g.Protocol, g.Actuators)
}

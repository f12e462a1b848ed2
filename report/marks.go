package report

import (
	"fmt"
	"math"
	"strings"

	"gaitrig/record"
	"gaitrig/scenarios"
)

// This file works out WHEN things happened, from the run folder alone, so
// every time plot can be marked with them: the walker reaching a new terrain
// segment, pushes, faults switching on and off, slip episodes and alarms.
// Drawing the marks is marksPlotter's job (markdraw.go).

// window is a stretch of simulated time [from, until] with a label.
type window struct {
	from, until float64
	label       string
}

// segmentMark is the moment the walker first touched a terrain segment.
type segmentMark struct {
	t     float64
	index int // segment index in the manifest's terrain, from 0
	seg   terrainSeg
}

// label says which segment began and what ground it is, in the words a
// reader compares with the scenario file.
func (s segmentMark) label() string {
	return fmt.Sprintf("seg %d: μs %s, %s°", s.index, fmtFloat(s.seg.muS), fmtFloat(s.seg.slope*180/math.Pi))
}

// segmentEntries finds, for every terrain segment after the first, the
// first tick at which a foot in contact with the ground (mode not free)
// had its contact point on that segment or beyond. The boundary is where
// the walker met the new ground, which is what a reader looks for in the
// plots; the terrain's x alone would not say when. A segment the walker
// never reached gets no mark; a foot that skips a short segment marks it
// at the same tick as the next one.
//
// t, contactX and mode are the telemetry columns (contactX and mode per
// foot); free is the mode code of a foot in the air.
func segmentEntries(segs []terrainSeg, t []float64, contactX [2][]float64, mode [2][]int, free int) []segmentMark {
	if len(segs) < 2 {
		return nil
	}
	var out []segmentMark
	next := 1 // the segment whose entry is looked for
	for i := range t {
		for f := 0; f < 2 && next < len(segs); f++ {
			if i >= len(contactX[f]) || i >= len(mode[f]) || mode[f][i] == free {
				continue
			}
			x := contactX[f][i]
			for next < len(segs) && x >= segs[next].x0 {
				out = append(out, segmentMark{t: t[i], index: next, seg: segs[next]})
				next++
			}
		}
		if next >= len(segs) {
			break
		}
	}
	return out
}

// windowsWhere returns the runs of consecutive ticks for which on(i) holds,
// each as a window from the first such tick's time to the last one's. A
// lone tick gives a window of zero length, which the drawing widens to a
// visible sliver.
func windowsWhere(t []float64, on func(i int) bool, label string) []window {
	var out []window
	start := -1
	for i := range t {
		if on(i) {
			if start < 0 {
				start = i
			}
			continue
		}
		if start >= 0 {
			out = append(out, window{from: t[start], until: t[i-1], label: label})
			start = -1
		}
	}
	if start >= 0 {
		out = append(out, window{from: t[start], until: t[len(t)-1], label: label})
	}
	return out
}

// pushWindows returns the ticks on which a push force acted on the hip,
// from the push_x_n and push_y_n columns: what the loop really applied,
// including pushes timed by a step number, which the scenario alone cannot
// place in time.
func pushWindows(t, px, py []float64) []window {
	return windowsWhere(t, func(i int) bool {
		return (i < len(px) && px[i] != 0 && !math.IsNaN(px[i])) || (i < len(py) && py[i] != 0 && !math.IsNaN(py[i]))
	}, "push")
}

// slipWindows returns the episodes in which one foot's contact mode was
// sliding. It reads only the mode column, which schema 2 run folders have
// always had, so the shading does not depend on how a recorder writes the
// utilization of a sliding foot.
func slipWindows(t []float64, mode []int, sliding int) []window {
	if sliding < 0 {
		return nil
	}
	return windowsWhere(t, func(i int) bool { return i < len(mode) && mode[i] == sliding }, "slip")
}

// modeCode returns the code the manifest gives a contact-mode word, or -1
// when the manifest does not name it. Schema 1 folders and manifests that
// leave the list out use the loop's fixed order free, rolling, sliding.
func modeCode(modes []string, word string) int {
	if len(modes) == 0 {
		modes = []string{"free", "rolling", "sliding"}
	}
	for i, m := range modes {
		if m == word {
			return i
		}
	}
	return -1
}

// faultWindows reads the scenario text the manifest carries with the
// scenarios package (the same loader the run used, so a fault means here
// what it meant to the loop) and returns when each sensor and link fault
// was active. Pushes are left out: pushWindows takes them from the
// telemetry. tEnd closes faults that last to the end of the run. A text
// that no longer loads (written by an older gaitrig, or empty) gives no
// windows and a note saying why, so the report still renders.
func faultWindows(name, text string, tEnd float64) ([]window, string) {
	if strings.TrimSpace(text) == "" {
		return nil, "The manifest carries no scenario text, so faults are not marked on the time axes."
	}
	sc, err := scenarios.Parse(name+" (scenario text in the manifest)", []byte(text))
	if err != nil {
		msg := err.Error()
		if i := strings.IndexByte(msg, '\n'); i >= 0 {
			msg = msg[:i] + " …"
		}
		return nil, "The scenario text in the manifest does not load in this version of gaitrig, so faults are not marked on the time axes: " + msg
	}
	var out []window
	for _, f := range sc.Faults {
		switch f.Kind {
		case scenarios.FaultPush:
			continue
		case scenarios.FaultFreeze:
			out = append(out, window{from: f.AtS, until: f.AtS + f.ForS, label: "freeze " + f.Sensor})
		default:
			until := f.UntilS
			if until == 0 {
				until = math.Max(tEnd, f.FromS)
			}
			out = append(out, window{from: f.FromS, until: until, label: f.Kind})
		}
	}
	return out, ""
}

// alarmLine is one alarm drawn across the time plots.
type alarmLine struct {
	t        float64
	severity string
}

// alarmLines picks the alarms (not the plain information events) to draw on
// the time plots, keeping at most one per severity within minGap of the
// last kept one, so a run that warns every tick does not paint the plots
// solid; the alarm timeline still shows every one.
func alarmLines(marks []alarmMark, minGap float64) []alarmLine {
	var out []alarmLine
	last := map[string]float64{}
	for _, m := range marks {
		if m.severity == string(record.Info) || math.IsNaN(m.t) || math.IsInf(m.t, 0) {
			continue
		}
		if lt, ok := last[m.severity]; ok && m.t-lt < minGap {
			continue
		}
		last[m.severity] = m.t
		out = append(out, alarmLine{t: m.t, severity: m.severity})
	}
	return out
}

// Event kinds whose values carry a friction demand (the plant's words, as
// hil records them; see hil/alarmkinds.go).
const (
	kindImpactSlip    = "impact_slip"
	kindFrictionLimit = "friction_limit"
)

// demandMark is a friction demand an event reports: the utilization the
// gait asked of a foot at an instant.
type demandMark struct {
	t      float64
	foot   int // 0 left, 1 right, -1 unknown
	demand float64
}

// demandsOf reads the friction demands out of the events: at a heel strike
// that slips, the impulse ratio |Λ_t|/Λ_n over μs (the utilization an
// impulse asks for, which no tick row holds: the impact happens inside a
// tick); at a friction-limit alarm, the utilization it reports. They are
// drawn on the utilization plot so a slip that the rows cannot show still
// reaches above 1.0.
func demandsOf(events []record.Event) []demandMark {
	var out []demandMark
	for _, e := range events {
		val, okV := e.Values["value"]
		lim, okL := e.Values["limit"]
		d := math.NaN()
		switch e.Kind {
		case kindImpactSlip:
			if okV && okL && lim > 0 {
				d = val / lim
			}
		case kindFrictionLimit:
			if okV {
				d = val
			}
		}
		if math.IsNaN(d) || math.IsInf(d, 0) {
			continue
		}
		foot := -1
		for i, n := range footNames {
			if e.Foot == n {
				foot = i
			}
		}
		out = append(out, demandMark{t: e.T, foot: foot, demand: d})
	}
	return out
}

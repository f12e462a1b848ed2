package compare

import (
	"math"

	"gaitrig/plant"
	"gaitrig/record"
)

// maxPoints bounds the points of one trace on the page.
const maxPoints = 1500

// traces are the decimated time series of one run for the overlays.
type traces struct {
	joints   []string
	t        []float64
	angle    [][]float64 // per joint
	normal   [2][]float64
	util     [2][]float64
	latency  []float64
	hasLaten bool
}

// walk reads both telemetries once: it finds the first diverging tick
// (when the runs start alike) and keeps decimated traces for the page.
func (r *Result) walk(ra, rb *record.Run) error {
	ta, err := ra.Ticks()
	if err != nil {
		return err
	}
	defer ta.Close()
	tb, err := rb.Ticks()
	if err != nil {
		return err
	}
	defer tb.Close()
	strideOf := func(run *record.Run) int64 {
		n := int64(1)
		if run.Summary != nil && run.Summary.Ticks > maxPoints {
			n = (run.Summary.Ticks + maxPoints - 1) / maxPoints
		}
		return n
	}
	sa, sb := strideOf(ra), strideOf(rb)
	r.series[0] = newTraces(ra.Manifest.JointNames)
	r.series[1] = newTraces(rb.Manifest.JointNames)
	qNames, vNames := record.StateColumns(ra.Manifest.NumQ)
	nq := ra.Manifest.NumQ
	if rb.Manifest.NumQ != nq {
		r.SameStart = false
	}
	okA, okB := ta.Next(), tb.Next()
	for okA || okB {
		if okA {
			if row := ta.Tick(); row.Index%sa == 0 {
				r.series[0].add(row)
			}
		}
		if okB {
			if row := tb.Tick(); row.Index%sb == 0 {
				r.series[1].add(row)
			}
		}
		if okA && okB {
			r.ComparedTicks++
			if r.SameStart && r.Divergence == nil {
				x, y := ta.Tick(), tb.Tick()
				r.Divergence = firstDiff(x, y, nq, qNames, vNames)
			}
		}
		okA, okB = okA && ta.Next(), okB && tb.Next()
	}
	if err := ta.Err(); err != nil {
		return err
	}
	return tb.Err()
}

// firstDiff compares the plant state of two rows of the same tick bit for
// bit, as the replay does; nil when they agree.
func firstDiff(x, y *record.Tick, nq int, qNames, vNames []string) *Divergence {
	same := func(a, b float64) bool {
		return math.Float64bits(a) == math.Float64bits(b) || (math.IsNaN(a) && math.IsNaN(b))
	}
	for i := 0; i < nq; i++ {
		if !same(x.Q[i], y.Q[i]) {
			return &Divergence{Tick: x.Index, T: x.T, Field: qNames[i], A: x.Q[i], B: y.Q[i]}
		}
	}
	for i := 0; i < nq; i++ {
		if !same(x.V[i], y.V[i]) {
			return &Divergence{Tick: x.Index, T: x.T, Field: vNames[i], A: x.V[i], B: y.V[i]}
		}
	}
	return nil
}

func newTraces(joints []string) *traces {
	return &traces{joints: joints, angle: make([][]float64, len(joints))}
}

func (s *traces) add(row *record.Tick) {
	s.t = append(s.t, row.T)
	for j := range s.joints {
		s.angle[j] = append(s.angle[j], row.Angle[j])
	}
	for f := 0; f < 2; f++ {
		s.normal[f] = append(s.normal[f], row.Feet[f].NormalN)
		u := row.Feet[f].Utilization
		if row.Feet[f].Mode == int(plant.Free) { // no utilization to show off the ground
			u = math.NaN()
		}
		s.util[f] = append(s.util[f], u)
	}
	s.latency = append(s.latency, row.LatencyUS)
	if !math.IsNaN(row.LatencyUS) {
		s.hasLaten = true
	}
}

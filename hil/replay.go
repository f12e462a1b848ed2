package hil

import (
	"fmt"
	"math"
	"strconv"

	"gaitrig/plant"
	"gaitrig/record"
	"gaitrig/scenarios"
)

// ReplayResult says whether re-running the plant with a run's recorded
// inputs reproduced its recorded trajectory bit for bit.
type ReplayResult struct {
	// Ticks is the number of recorded ticks replayed.
	Ticks int
	// Match is true when every q and q̇ of every tick matched exactly.
	Match bool
	// FirstDivergence is the first tick whose state differs, −1 if none.
	FirstDivergence int64
	// Field names the first differing coordinate (q2, v0, …).
	Field string
	// Recorded and Replayed are that coordinate's value in the telemetry
	// and in the replay.
	Recorded, Replayed float64
	// Truncated is true when the telemetry's last row was cut (a killed
	// run); the rows before it were replayed.
	Truncated bool
}

// String says the result in a sentence.
func (r ReplayResult) String() string {
	if r.Match {
		return fmt.Sprintf("replay matches the record exactly over %d ticks", r.Ticks)
	}
	return fmt.Sprintf("replay diverges at tick %d: %s recorded %s, replayed %s",
		r.FirstDivergence, r.Field, strconv.FormatFloat(r.Recorded, 'g', -1, 64), strconv.FormatFloat(r.Replayed, 'g', -1, 64))
}

// Replay steps model from initial with each recorded tick's applied torques
// and hip push (dt = 1/tickHz) and compares the resulting q and q̇ with the
// recorded ones bit for bit. Telemetry rows hold the state at the end of
// their tick, so row k is compared after k+1 steps.
func Replay(model *plant.Model, initial plant.State, ticks []record.Tick, tickHz float64) (ReplayResult, error) {
	res := ReplayResult{Ticks: len(ticks), Match: true, FirstDivergence: -1}
	if !(tickHz > 0) || math.IsInf(tickHz, 0) {
		return res, fmt.Errorf("hil: replay needs the run's tick rate, got %g Hz", tickHz)
	}
	s := initial
	var in plant.Input
	var tr plant.TickResult
	dt := 1 / tickHz
	nq, na := model.NumDOF(), model.NumActuators()
	for k := range ticks {
		row := &ticks[k]
		for j := 0; j < na; j++ {
			in.Torque[j] = row.Applied[j]
		}
		in.HipForce = row.Push
		model.Step(&s, &in, dt, &tr)
		for i := 0; i < nq; i++ {
			if name, a, b, ok := differ("q", i, row.Q[i], s.Q[i]); !ok {
				return diverged(res, row.Index, name, a, b), nil
			}
		}
		for i := 0; i < nq; i++ {
			if name, a, b, ok := differ("v", i, row.V[i], s.V[i]); !ok {
				return diverged(res, row.Index, name, a, b), nil
			}
		}
	}
	return res, nil
}

func differ(p string, i int, rec, rep float64) (string, float64, float64, bool) {
	same := math.Float64bits(rec) == math.Float64bits(rep) || (math.IsNaN(rec) && math.IsNaN(rep))
	return p + strconv.Itoa(i), rec, rep, same
}

func diverged(r ReplayResult, tick int64, field string, a, b float64) ReplayResult {
	r.Match, r.FirstDivergence, r.Field, r.Recorded, r.Replayed = false, tick, field, a, b
	return r
}

// ReplayRun replays a run folder: it rebuilds the model from the scenario
// text in the manifest, the initial state with initial (nil: InitialState,
// which covers scenarios with an explicit initial state), checks that state
// against the manifest's exact initial q and q̇, and replays the telemetry.
func ReplayRun(dir string, initial func(*scenarios.Scenario, *plant.Model) (plant.State, error)) (ReplayResult, error) {
	run, err := record.Open(dir)
	if err != nil {
		return ReplayResult{}, err
	}
	mf := &run.Manifest
	s, err := scenarios.Parse(mf.ScenarioFile, []byte(mf.ScenarioText))
	if err != nil {
		return ReplayResult{}, fmt.Errorf("hil: replay %s: the scenario stored in the manifest does not load: %w", dir, err)
	}
	cfg, err := FromScenario(s)
	if err != nil {
		return ReplayResult{}, err
	}
	m, err := NewModel(s, cfg)
	if err != nil {
		return ReplayResult{}, err
	}
	if initial == nil {
		initial = InitialState
	}
	st, err := initial(s, m)
	if err != nil {
		return ReplayResult{}, fmt.Errorf("hil: replay %s: %w", dir, err)
	}
	n := m.NumDOF()
	if len(mf.InitialQ) != n || len(mf.InitialV) != n {
		return ReplayResult{}, fmt.Errorf("hil: replay %s: the manifest holds %d/%d initial coordinates, the model has %d", dir, len(mf.InitialQ), len(mf.InitialV), n)
	}
	for i := 0; i < n; i++ {
		if math.Float64bits(mf.InitialQ[i]) != math.Float64bits(st.Q[i]) || math.Float64bits(mf.InitialV[i]) != math.Float64bits(st.V[i]) {
			return ReplayResult{}, fmt.Errorf("hil: replay %s: the rebuilt initial state differs from the manifest's at coordinate %d (q %v vs %v, v %v vs %v)",
				dir, i, st.Q[i], mf.InitialQ[i], st.V[i], mf.InitialV[i])
		}
	}
	ticks, truncated, err := run.AllTicks()
	if err != nil {
		return ReplayResult{}, err
	}
	r, err := Replay(m, st, ticks, mf.TickHz)
	r.Truncated = truncated
	return r, err
}

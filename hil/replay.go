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
	p, err := newReplayer(model, initial, tickHz)
	if err != nil {
		return ReplayResult{Ticks: len(ticks), Match: true, FirstDivergence: -1}, err
	}
	for k := range ticks {
		p.row(&ticks[k])
	}
	return p.res, nil
}

// replayer re-runs the plant one recorded row at a time, so a replay from a
// run folder holds one row in memory, not the whole run.
type replayer struct {
	m   *plant.Model
	s   plant.State
	in  plant.Input
	tr  plant.TickResult
	dt  float64
	res ReplayResult
}

func newReplayer(model *plant.Model, initial plant.State, tickHz float64) (*replayer, error) {
	if !(tickHz > 0) || math.IsInf(tickHz, 0) {
		return nil, fmt.Errorf("hil: replay needs the run's tick rate, got %g Hz", tickHz)
	}
	return &replayer{m: model, s: initial, dt: 1 / tickHz, res: ReplayResult{Match: true, FirstDivergence: -1}}, nil
}

// row counts one recorded row and, until the first divergence, steps the
// plant with its inputs and compares the state with it.
func (p *replayer) row(row *record.Tick) {
	p.res.Ticks++
	if !p.res.Match {
		return
	}
	nq, na := p.m.NumDOF(), p.m.NumActuators()
	for j := 0; j < na; j++ {
		p.in.Torque[j] = row.Applied[j]
	}
	p.in.HipForce = row.Push
	p.m.Step(&p.s, &p.in, p.dt, &p.tr)
	for i := 0; i < nq; i++ {
		if name, a, b, ok := differ("q", i, row.Q[i], p.s.Q[i]); !ok {
			p.res = diverged(p.res, row.Index, name, a, b)
			return
		}
	}
	for i := 0; i < nq; i++ {
		if name, a, b, ok := differ("v", i, row.V[i], p.s.V[i]); !ok {
			p.res = diverged(p.res, row.Index, name, a, b)
			return
		}
	}
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
	p, err := newReplayer(m, st, mf.TickHz)
	if err != nil {
		return ReplayResult{}, err
	}
	// Stream the rows: a long run's telemetry need not fit in memory.
	tr, err := run.Ticks()
	if err != nil {
		return ReplayResult{}, err
	}
	defer tr.Close()
	for tr.Next() {
		p.row(tr.Tick())
	}
	if err := tr.Err(); err != nil {
		return ReplayResult{}, err
	}
	p.res.Truncated = tr.Truncated()
	return p.res, nil
}

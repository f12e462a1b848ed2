package hil

import (
	"fmt"
	"math"
	"strconv"

	"gaitrig/plant"
	"gaitrig/record"
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
	// Field names the first differing coordinate by its telemetry column
	// (theta_left_rad, vx_hip_mps, …).
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
	if r.Ticks == 0 {
		return "nothing replayed: the record holds no tick"
	}
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
	p, err := NewReplayer(model, initial, tickHz)
	if err != nil {
		return ReplayResult{Ticks: len(ticks), Match: true, FirstDivergence: -1}, err
	}
	for k := range ticks {
		p.Row(&ticks[k])
	}
	return p.res, nil
}

// Replayer re-runs the plant one recorded row at a time, so a replay from a
// run folder (rig.Replay streams its telemetry) holds one row in memory,
// not the whole run.
type Replayer struct {
	m *plant.Model
	// qName and vName are the telemetry columns of q and q̇, for the
	// divergence message.
	qName, vName []string
	s            plant.State
	in           plant.Input
	tr           plant.TickResult
	dt           float64
	res          ReplayResult
	// belt says the terrain has a treadmill belt; beltV is its speed at
	// the start of the next row's tick (the last row's belt_speed_mps).
	belt  bool
	beltV float64
}

// NewReplayer starts a replay of model from initial at tickHz (the run's
// tick rate, from its manifest).
func NewReplayer(model *plant.Model, initial plant.State, tickHz float64) (*Replayer, error) {
	if !(tickHz > 0) || math.IsInf(tickHz, 0) {
		return nil, fmt.Errorf("hil: replay needs the run's tick rate, got %g Hz", tickHz)
	}
	q, v := record.StateColumns(model.NumDOF())
	return &Replayer{m: model, qName: q, vName: v, s: initial, dt: 1 / tickHz, res: ReplayResult{Match: true, FirstDivergence: -1},
		belt: model.BeltSegment() >= 0}, nil
}

// SetBeltSpeed gives the belt's speed at the start of the run (the
// profile's speed at the initial time), m/s, for a terrain with a
// treadmill belt; later ticks take it from the rows' belt_speed_mps, as
// the loop did.
func (p *Replayer) SetBeltSpeed(v float64) { p.beltV = v }

// Row counts one recorded row and, until the first divergence, steps the
// plant with its inputs and compares the state with it. Rows come in
// recorded order.
func (p *Replayer) Row(row *record.Tick) {
	p.res.Ticks++
	if !p.res.Match {
		return
	}
	nq, na := p.m.NumDOF(), p.m.NumActuators()
	for j := 0; j < na; j++ {
		p.in.Torque[j] = row.Applied[j]
	}
	p.in.HipForce = row.Push
	if p.belt {
		p.in.Belt = plant.BeltMotion{Speed: p.beltV, Accel: (row.BeltSpeed - p.beltV) / p.dt}
		p.beltV = row.BeltSpeed
	}
	p.m.Step(&p.s, &p.in, p.dt, &p.tr)
	for i := 0; i < nq; i++ {
		if name, a, b, ok := differ(p.qName[i], row.Q[i], p.s.Q[i]); !ok {
			p.res = diverged(p.res, row.Index, name, a, b)
			return
		}
	}
	for i := 0; i < nq; i++ {
		if name, a, b, ok := differ(p.vName[i], row.V[i], p.s.V[i]); !ok {
			p.res = diverged(p.res, row.Index, name, a, b)
			return
		}
	}
}

func differ(name string, rec, rep float64) (string, float64, float64, bool) {
	same := math.Float64bits(rec) == math.Float64bits(rep) || (math.IsNaN(rec) && math.IsNaN(rep))
	return name, rec, rep, same
}

func diverged(r ReplayResult, tick int64, field string, a, b float64) ReplayResult {
	r.Match, r.FirstDivergence, r.Field, r.Recorded, r.Replayed = false, tick, field, a, b
	return r
}

// Result is the replay so far: every row given to Row counted, the first
// divergence if any. Truncated is the caller's to set (it knows whether the
// telemetry was cut).
func (p *Replayer) Result() ReplayResult { return p.res }

package rig

import (
	"errors"
	"fmt"
	"math"

	"gaitrig/hil"
	"gaitrig/record"
	"gaitrig/scenarios"
)

// Replay replays a run folder: it rebuilds the model from the scenario text
// in the manifest and the initial state as a run does (the natural gait
// included), checks that state bit for bit against the manifest's initial
// q and q̇, and steps the plant with the recorded applied torques and hip
// pushes, row by row (hil.Replayer), streaming the telemetry so a long
// run's file need not fit in memory. A folder that cannot be replayed is a
// configuration error.
func Replay(dir string) (hil.ReplayResult, error) {
	res, err := replay(dir)
	if err != nil {
		return res, ConfigError(err)
	}
	return res, nil
}

func replay(dir string) (hil.ReplayResult, error) {
	run, err := record.Open(dir)
	if err != nil {
		return hil.ReplayResult{}, err
	}
	mf := &run.Manifest
	s, err := scenarios.Parse(mf.ScenarioFile, []byte(mf.ScenarioText))
	if err != nil {
		return hil.ReplayResult{}, fmt.Errorf("replay %s: the scenario stored in the manifest does not load: %w", dir, err)
	}
	cfg, err := FromScenario(s)
	if err != nil {
		return hil.ReplayResult{}, err
	}
	m, err := NewModel(s, cfg)
	if err != nil {
		return hil.ReplayResult{}, err
	}
	st, err := InitialState(s, m)
	if err != nil {
		return hil.ReplayResult{}, fmt.Errorf("replay %s: %w", dir, err)
	}
	n := m.NumDOF()
	if len(mf.InitialQ) != n || len(mf.InitialV) != n {
		return hil.ReplayResult{}, fmt.Errorf("replay %s: the manifest holds %d/%d initial coordinates, the model has %d", dir, len(mf.InitialQ), len(mf.InitialV), n)
	}
	for i := 0; i < n; i++ {
		if math.Float64bits(mf.InitialQ[i]) != math.Float64bits(st.Q[i]) || math.Float64bits(mf.InitialV[i]) != math.Float64bits(st.V[i]) {
			return hil.ReplayResult{}, fmt.Errorf("replay %s: the rebuilt initial state differs from the manifest's at coordinate %d (q %v vs %v, v %v vs %v)",
				dir, i, st.Q[i], mf.InitialQ[i], st.V[i], mf.InitialV[i])
		}
	}
	p, err := hil.NewReplayer(m, st, mf.TickHz)
	if err != nil {
		return hil.ReplayResult{}, err
	}
	if b := s.Treadmill(); b != nil {
		p.SetBeltSpeed(b.Profile.Speed(st.T))
	}
	tr, err := run.Ticks()
	if err != nil {
		return hil.ReplayResult{}, err
	}
	defer tr.Close()
	for tr.Next() {
		p.Row(tr.Tick())
	}
	if err := tr.Err(); err != nil {
		return hil.ReplayResult{}, err
	}
	res := p.Result()
	res.Truncated = tr.Truncated()
	if res.Ticks == 0 {
		// Nothing compared is not a match: a run that never started (no
		// greeting, refused at the handshake, interrupted before its first
		// tick) has nothing to replay.
		res.Match = false
		why := "the run recorded no tick"
		if run.Summary != nil {
			why += fmt.Sprintf(" (outcome %s%s)", run.Summary.Outcome, reasonOf(run.Summary.Reason))
		}
		return res, fmt.Errorf("replay %s: %w: %s", dir, ErrNothingToReplay, why)
	}
	return res, nil
}

// ErrNothingToReplay is wrapped by Replay's error for a run folder with no
// telemetry rows: there is nothing to compare, so it is neither a match
// nor a divergence.
var ErrNothingToReplay = errors.New("nothing to replay")

func reasonOf(r string) string {
	if r == "" {
		return ""
	}
	return ": " + r
}

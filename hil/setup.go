package hil

import (
	"errors"
	"fmt"
	"os"

	"gaitrig/plant"
	"gaitrig/record"
	"gaitrig/scenarios"
)

// NewModel builds the plant model of a scenario with the physics options
// of cfg (from FromScenario).
func NewModel(s *scenarios.Scenario, cfg Config) (*plant.Model, error) {
	p, err := s.PlantParams()
	if err != nil {
		return nil, fmt.Errorf("hil: scenario %s: %w", s.Name, err)
	}
	return plant.New(p, cfg.Physics)
}

// ErrNaturalGait is returned by InitialState for a scenario that starts
// from the natural gait: the gait finder supplies that state, not the loop.
var ErrNaturalGait = errors.New("hil: the scenario starts from the natural gait; find it with plant.FindGait")

// InitialState builds the explicit initial state of a scenario: the stance
// foot rolling on the terrain at x_m with the given leg and torso angles
// and rates.
func InitialState(s *scenarios.Scenario, m *plant.Model) (plant.State, error) {
	in := s.Initial
	if in.NaturalGait {
		return plant.State{}, ErrNaturalGait
	}
	if len(in.LegAnglesRad) != 2 {
		return plant.State{}, fmt.Errorf("hil: scenario %s: initial.leg_angles_rad needs 2 values, has %d", s.Name, len(in.LegAnglesRad))
	}
	rates := []float64{0, 0}
	copy(rates, in.LegRatesRadps)
	if m.HasTorso() {
		rates = append(rates, in.TorsoRateRadps)
	}
	return m.Stand(s.StanceLeg(), in.XM, [2]float64{in.LegAnglesRad[0], in.LegAnglesRad[1]}, in.TorsoAngleRad, rates...)
}

// FootModes names the contact-mode codes of record.Foot.Mode, index = code.
var FootModes = []string{plant.Free.String(), plant.Rolling.String(), plant.Sliding.String()}

// Manifest fills a run manifest for record.Create from the scenario (may be
// nil), the loop configuration, the model and the exact initial state.
func Manifest(s *scenarios.Scenario, cfg Config, m *plant.Model, initial plant.State, link, toolVersion string) (record.Manifest, error) {
	c, err := cfg.withDefaults()
	if err != nil {
		return record.Manifest{}, err
	}
	host, _ := os.Hostname()
	n := m.NumDOF()
	mf := record.Manifest{
		Plant:       record.PlantOf(m.Params()),
		ToolVersion: toolVersion,
		Seed:        c.Seed,
		Clock:       string(c.Clock),
		TickHz:      c.TickHz,
		Link:        link,
		Host:        host,
		NumQ:        n,
		JointNames:  append([]string(nil), m.JointNames()...),
		FootModes:   FootModes,
		InitialQ:    append([]float64(nil), initial.Q[:n]...),
		InitialV:    append([]float64(nil), initial.V[:n]...),
	}
	if s != nil {
		mf.Scenario = s.Name
		mf.ScenarioFile = s.File
		mf.ScenarioText = string(s.Text)
		mf.ScenarioHash = scenarios.Hash(s.Text)
	}
	return mf, nil
}

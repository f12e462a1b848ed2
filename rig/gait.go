package rig

import (
	"errors"
	"fmt"

	"gaitrig/firmware/reference"
	"gaitrig/plant"
	"gaitrig/scenarios"
)

// errNaturalGait says that a scenario's initial state is its natural gait,
// which the gait finder supplies.
var errNaturalGait = errors.New("rig: the scenario starts from the natural gait")

// InitialState gives the state a scenario starts from: the explicit one
// (the stance foot rolling on the terrain at initial.x_m with the given leg
// and torso angles and rates), or, with initial.natural_gait, the
// period-one gait of its walker (passive, or closed loop with the built-in
// controller) found by the gait finder from the scenario's guess. A
// scenario that cannot give a state is a configuration error; a gait
// finder that finds no gait is not (the walker, not the file, is at fault).
func InitialState(sc *scenarios.Scenario, model *plant.Model) (plant.State, error) {
	s, err := initialOnSurface(sc, model)
	if err == nil {
		// The scenario's rates (and the gait finder's state) are relative
		// to the ground under the walker; on a belt that ground moves.
		if b := sc.Treadmill(); b != nil {
			model.MoveWithBelt(&s, b.Profile.Speed(0))
		}
	}
	return s, err
}

// initialOnSurface is InitialState relative to the surface under the
// walker.
func initialOnSurface(sc *scenarios.Scenario, model *plant.Model) (plant.State, error) {
	s, err := explicitState(sc, model)
	if err == nil {
		return s, nil
	}
	if !errors.Is(err, errNaturalGait) {
		return plant.State{}, ConfigError(err)
	}
	g, err := FindGait(sc, model)
	if errors.Is(err, plant.ErrKneedAnalysis) {
		// Until the gait finder carries the knees, say what to do instead.
		return plant.State{}, Configf("scenario %s: initial.natural_gait: %v; give an explicit initial state (initial.leg_angles_rad and leg_rates_radps, just after a heel strike; the knees start straight and locked)", sc.Name, err)
	}
	if err != nil {
		return plant.State{}, err
	}
	if !g.Found {
		return plant.State{}, fmt.Errorf("scenario %s: the gait finder found no period-one gait to start from; give an explicit initial state", sc.Name)
	}
	return g.State, nil
}

// explicitState builds the scenario's explicit initial state, or returns
// errNaturalGait.
func explicitState(s *scenarios.Scenario, m *plant.Model) (plant.State, error) {
	in := s.Initial
	if in.NaturalGait {
		return plant.State{}, errNaturalGait
	}
	if len(in.LegAnglesRad) != 2 {
		return plant.State{}, fmt.Errorf("rig: scenario %s: initial.leg_angles_rad needs 2 values, has %d", s.Name, len(in.LegAnglesRad))
	}
	rates := []float64{0, 0}
	copy(rates, in.LegRatesRadps)
	if m.HasTorso() {
		rates = append(rates, in.TorsoRateRadps)
	}
	return m.Stand(s.StanceLeg(), s.StartXM(), [2]float64{in.LegAnglesRad[0], in.LegAnglesRad[1]}, in.TorsoAngleRad, rates...)
}

// GaitPolicy is the policy the gait finder analyses for a scenario: nil for
// a passive walker (link none or passive mode), the built-in controller's
// law otherwise. ok is false for a controller the rig cannot evaluate as a
// pure function of the state (a board, an MQTT process).
func GaitPolicy(sc *scenarios.Scenario, model *plant.Model) (policy plant.Policy, ok bool, err error) {
	if sc.Controller.Link == scenarios.LinkNone || sc.Controller.Mode == reference.ModePassive {
		return nil, true, nil
	}
	if sc.Controller.Link != scenarios.LinkBuiltin {
		return nil, false, nil
	}
	g, err := reference.GainsFromSettings(sc.Controller.Settings)
	if err != nil {
		return nil, false, Configf("scenario %s: controller.settings: %w", sc.Name, err)
	}
	return reference.PlantPolicy(model, g), true, nil
}

// FindGait runs the gait finder on the scenario's walker and policy (see
// GaitPolicy) from the scenario's guess: its explicit initial fields when
// given, else a symmetric stance with a typical stride.
func FindGait(sc *scenarios.Scenario, model *plant.Model) (plant.Gait, error) {
	policy, ok, err := GaitPolicy(sc, model)
	if err != nil {
		return plant.Gait{}, err
	}
	if !ok {
		return plant.Gait{}, Configf("scenario %s: the gait finder needs a passive walker or the built-in controller (a pure function of the measured state); this scenario uses link %q", sc.Name, sc.Controller.Link)
	}
	guess, err := gaitGuess(sc, model)
	if err != nil {
		return plant.Gait{}, err
	}
	return plant.FindGait(model, policy, guess, plant.GaitOptions{})
}

// gaitGuess is the state the gait finder starts from.
func gaitGuess(sc *scenarios.Scenario, model *plant.Model) (plant.State, error) {
	copyScenario := *sc
	copyScenario.Initial.NaturalGait = false
	if len(copyScenario.Initial.LegAnglesRad) != 2 {
		copyScenario.Initial.LegAnglesRad = []float64{0.2, -0.2}
		copyScenario.Initial.LegRatesRadps = []float64{-1.2, -0.8}
	}
	s, err := explicitState(&copyScenario, model)
	if err != nil {
		return plant.State{}, Configf("scenario %s: no usable guess for the gait finder: %w", sc.Name, err)
	}
	return s, nil
}

// Check validates a scenario down to what a run builds before it opens the
// link: the loop configuration, the plant model and, unless the scenario
// starts from its natural gait (which takes the gait finder, a run's job),
// the initial state. Every error is a configuration error.
func Check(sc *scenarios.Scenario) error {
	cfg, err := FromScenario(sc)
	if err != nil {
		return ConfigError(err)
	}
	model, err := NewModel(sc, cfg)
	if err != nil {
		return ConfigError(err)
	}
	if _, err := explicitState(sc, model); err != nil && !errors.Is(err, errNaturalGait) {
		return ConfigError(err)
	}
	return nil
}

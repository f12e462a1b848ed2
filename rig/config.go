package rig

import (
	"errors"
	"fmt"
	"slices"
	"time"

	"gaitrig/hil"
	"gaitrig/plant"
	"gaitrig/record"
	"gaitrig/scenarios"
)

// FromScenario turns a loaded scenario into a loop configuration: clock,
// watchdog, physics options, sensors, actuators, faults, alarms, run length
// and criteria, with hil's defaults filled in. The walker and terrain come
// from s.PlantParams, the model from NewModel, the initial state from
// InitialState; the link from the link registry.
func FromScenario(s *scenarios.Scenario) (hil.Config, error) {
	if s == nil {
		return hil.Config{}, errors.New("rig: no scenario")
	}
	c := hil.Config{
		Clock:    hil.ClockMode(s.Clock.Mode),
		TickHz:   s.Clock.TickHz,
		Physics:  s.PlantOptions(),
		Watchdog: msDuration(s.WatchdogMS),
		Sensors: hil.SensorModel{
			CountsPerRev:     s.Sensors.EncoderCountsPerRev,
			AngleNoise:       s.Sensors.AngleNoiseRad,
			RateNoise:        s.Sensors.RateNoiseRadps,
			AngleBias:        s.Sensors.AngleBiasRad,
			RateBias:         s.Sensors.RateBiasRadps,
			PitchNoise:       s.Sensors.IMUPitchNoiseRad,
			PitchRateNoise:   s.Sensors.IMURateNoiseRadps,
			PitchBias:        s.Sensors.IMUPitchBiasRad,
			PitchRateBias:    s.Sensors.IMURateBiasRadps,
			ContactThreshold: s.Sensors.ContactThresholdN,
		},
		Actuators: hil.ActuatorModel{
			TorqueLimit: s.Actuators.TorqueLimitNM,
			JointLimits: s.Actuators.JointTorqueLimitsNM,
			Lag:         s.Actuators.LagS,
		},
		Severity: map[string]hil.Severity{},
		Duration: s.Run.DurationS,
		MaxSteps: s.Run.MaxSteps,
		Criteria: s.Pass,
		Seed:     s.Sensors.Seed,
		Belt:     s.Treadmill(),
		Harness:  s.FallHarness(),
	}
	for k, v := range s.Alarms {
		if !slices.Contains(hil.AlarmKinds, k) {
			return c, fmt.Errorf("rig: scenario %s sets a severity for unknown alarm kind %q", s.Name, k)
		}
		if v != hil.SeverityWarn && v != hil.SeverityTrip {
			return c, fmt.Errorf("rig: scenario %s: alarm %s has severity %q: want warn or trip", s.Name, k, v)
		}
		c.Severity[k] = v
	}
	for i, f := range s.Faults {
		switch f.Kind {
		case scenarios.FaultLatency:
			c.LinkFaults = append(c.LinkFaults, hil.LinkFault{Kind: hil.FaultLatency, From: f.FromS, Until: f.UntilS,
				Fixed: msDuration(f.FixedMS), Jitter: msDuration(f.JitterMS)})
		case scenarios.FaultDrop:
			c.LinkFaults = append(c.LinkFaults, hil.LinkFault{Kind: hil.FaultDrop, From: f.FromS, Until: f.UntilS, Rate: f.Rate})
		case scenarios.FaultCorrupt:
			c.LinkFaults = append(c.LinkFaults, hil.LinkFault{Kind: hil.FaultCorrupt, From: f.FromS, Until: f.UntilS, Rate: f.Rate})
		case scenarios.FaultFreeze:
			c.Freezes = append(c.Freezes, hil.Freeze{Sensor: f.Sensor, Start: f.AtS, Duration: f.ForS})
		case scenarios.FaultPush:
			p := hil.Push{At: f.AtS, AtStep: f.AtStep, Duration: f.DurationS}
			if len(f.ImpulseNS) == 2 {
				p.Impulse = [2]float64{f.ImpulseNS[0], f.ImpulseNS[1]}
			}
			if len(f.ForceN) == 2 {
				p.Force = [2]float64{f.ForceN[0], f.ForceN[1]}
			}
			c.Pushes = append(c.Pushes, p)
		default:
			return c, fmt.Errorf("rig: scenario %s: faults[%d] has unknown kind %q", s.Name, i, f.Kind)
		}
	}
	return c.WithDefaults()
}

func msDuration(ms float64) time.Duration { return time.Duration(ms * float64(time.Millisecond)) }

// NewModel builds the plant model of a scenario with the physics options
// of cfg (from FromScenario).
func NewModel(s *scenarios.Scenario, cfg hil.Config) (*plant.Model, error) {
	p, err := s.PlantParams()
	if err != nil {
		return nil, fmt.Errorf("rig: scenario %s: %w", s.Name, err)
	}
	return plant.New(p, cfg.Physics)
}

// Manifest is hil.Manifest plus what the run was made from: the scenario's
// name, file, full text and its hash, so the folder alone can rebuild and
// replay the run. s may be nil for a run not made from a scenario.
func Manifest(s *scenarios.Scenario, cfg hil.Config, m *plant.Model, initial plant.State, link, toolVersion string) (record.Manifest, error) {
	mf, err := hil.Manifest(cfg, m, initial, link, toolVersion)
	if err != nil || s == nil {
		return mf, err
	}
	mf.Scenario = s.Name
	mf.ScenarioFile = s.File
	mf.ScenarioText = string(s.Text)
	mf.ScenarioHash = scenarios.Hash(s.Text)
	return mf, nil
}

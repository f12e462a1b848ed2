package hil

import (
	"context"
	"errors"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/firmware/reference"
	"gaitrig/plant"
	"gaitrig/record"
	"gaitrig/scenarios"
)

// libraryFirmware is the firmware a scenario's controller block asks for:
// the reference law (walk or passive) with the scenario's settings; link
// none is the passive mode (zero torques).
func libraryFirmware(t testing.TB, s *scenarios.Scenario, actuators int) firmwareFunc {
	t.Helper()
	g, err := reference.GainsFromSettings(s.Controller.Settings)
	if err != nil {
		t.Fatal(err)
	}
	mode := s.Controller.Mode
	if s.Controller.Link == scenarios.LinkNone {
		mode = reference.ModePassive
	}
	return func(c bridges.Conn) error {
		return reference.Serve(c, reference.Options{Gains: &g, Mode: mode, Actuators: actuators, IdleTimeout: 5 * time.Second})
	}
}

// loadBuiltin loads a built-in scenario and returns it with its config
// (watchdog widened to 2 s, as other test binaries load the 2-core host),
// its model and its initial state; a scenario that starts from the natural
// gait gets that gait found.
func loadBuiltin(t testing.TB, name string) (*scenarios.Scenario, Config, *plant.Model, plant.State) {
	t.Helper()
	s, err := scenarios.LoadBuiltin(name)
	if err != nil {
		t.Fatal(err)
	}
	cfg, err := FromScenario(s)
	if err != nil {
		t.Fatal(err)
	}
	cfg.Watchdog = 2 * time.Second
	m, err := NewModel(s, cfg)
	if err != nil {
		t.Fatal(err)
	}
	init, err := InitialState(s, m)
	if errors.Is(err, ErrNaturalGait) {
		init, err = naturalGait(s, m)
	}
	if err != nil {
		t.Fatal(err)
	}
	return s, cfg, m, init
}

// Every built-in scenario runs through the loop against the reference
// firmware (lockstep, so the suite stays fast; latency faults then count
// in ticks) and leaves a complete run folder with an outcome. Whether each
// scenario passes depends on its tuning and is the scenario library's
// business; this test checks that the harness carries every one of them
// through without an error and that the record agrees with the result.
func TestLibraryScenariosRunToCompleteRecords(t *testing.T) {
	for _, e := range scenarios.Library() {
		t.Run(e.Name, func(t *testing.T) {
			s, cfg, m, init := loadBuiltin(t, e.Name)
			cfg.Clock = Lockstep
			res, dir, err, _ := runWith(t, context.Background(), cfg, m, init, libraryFirmware(t, s, m.NumActuators()))
			if err != nil {
				t.Fatal(err)
			}
			run := openRun(t, dir)
			ticks, truncated, err := run.AllTicks()
			if err != nil || truncated || int64(len(ticks)) != run.Summary.Ticks || run.Summary.Outcome != res.Summary.Outcome {
				t.Fatalf("record: %d rows (truncated %v, err %v), summary %d ticks, outcome %s vs %s",
					len(ticks), truncated, err, run.Summary.Ticks, run.Summary.Outcome, res.Summary.Outcome)
			}
			t.Logf("%s: %s%s; %d steps in %.1f s, mean speed %.3f m/s, peak friction utilization %.3f, alarms %v",
				e.Name, res.Summary.Outcome, reasonSuffix(res.Summary.Reason), res.Summary.Steps, res.Summary.SimTimeS,
				res.Summary.MeanSpeedMPS, res.Summary.PeakFrictionUtilization, res.Summary.Alarms)
		})
	}
}

// naturalGait finds the passive period-one gait from the scenario's guess.
func naturalGait(s *scenarios.Scenario, m *plant.Model) (plant.State, error) {
	in := s.Initial
	var a [2]float64
	copy(a[:], in.LegAnglesRad)
	guess, err := m.Stand(s.StanceLeg(), in.XM, a, in.TorsoAngleRad, in.LegRatesRadps...)
	if err != nil {
		return guess, err
	}
	g, err := plant.FindGait(m, nil, guess, plant.GaitOptions{})
	return g.State, err
}

// A run folder made from a scenario replays exactly from what it holds:
// the scenario text in the manifest rebuilds model and initial state, the
// telemetry supplies the applied torques and pushes.
func TestReplayRunFromFolder(t *testing.T) {
	s, cfg, m, init := loadBuiltin(t, "push-recovery")
	cfg.MaxSteps = 10
	rec := newScenarioRecord(t, s, cfg, m, init)
	rig, fw := inprocPair()
	defer rig.Close()
	go libraryFirmware(t, s, m.NumActuators())(fw)
	res, err := Run(context.Background(), cfg, m, init, rig, rec)
	if err != nil {
		t.Fatal(err)
	}
	r, err := ReplayRun(rec.Dir(), nil)
	if err != nil {
		t.Fatal(err)
	}
	if !r.Match || int64(r.Ticks) != res.Summary.Ticks || r.Truncated {
		t.Fatalf("%s (run had %d ticks, truncated %v)", r, res.Summary.Ticks, r.Truncated)
	}
	t.Log(r)

	// One applied torque changed in the file, and a cut last line as a
	// killed run leaves: the replay diverges at that row, still counts
	// every complete row and says the telemetry was cut.
	path := filepath.Join(rec.Dir(), record.TelemetryFile)
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(string(data), "\n")
	col := slices.Index(strings.Split(lines[0], ","), "tau_applied_"+m.JointNames()[0]+"_nm")
	const changed = 500
	fields := strings.Split(lines[1+changed], ",")
	v, err := strconv.ParseFloat(fields[col], 64)
	if col < 0 || err != nil {
		t.Fatalf("torque column %d of row %d: %v", col, changed, err)
	}
	fields[col] = strconv.FormatFloat(v+1e-3, 'g', -1, 64)
	lines[1+changed] = strings.Join(fields, ",")
	if err := os.WriteFile(path, []byte(strings.Join(lines, "\n")+"6035,6.0"), 0o644); err != nil {
		t.Fatal(err)
	}
	r, err = ReplayRun(rec.Dir(), nil)
	if err != nil {
		t.Fatal(err)
	}
	if r.Match || r.FirstDivergence != changed || int64(r.Ticks) != res.Summary.Ticks || !r.Truncated {
		t.Fatalf("after changing row %d: %s (ticks %d of %d, truncated %v)", changed, r, r.Ticks, res.Summary.Ticks, r.Truncated)
	}
}

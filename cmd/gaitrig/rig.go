package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"time"

	"gaitrig/bridges"
	"gaitrig/firmware/reference"
	"gaitrig/hil"
	"gaitrig/plant"
	"gaitrig/record"
	"gaitrig/report"
	"gaitrig/scenarios"
)

// runOptions are what a command asks of one scenario run.
type runOptions struct {
	Link     *linkSpec // overrides the scenario's controller link; nil keeps it
	Clock    string    // overrides the scenario's clock mode when set
	OutRoot  string    // parent folder of run folders (default "runs")
	RunDir   string    // exact run folder; empty: OutRoot/<scenario>-<time>
	Report   bool      // write report.html at the end
	JUnit    bool      // write junit.xml (one case per criterion)
	Parquet  bool      // write telemetry.parquet
	Live     io.Writer // a line per step, nil for none
	Log      io.Writer // plain sentences about the run (handshake, scheduling)
	Rig      string    // MQTT rig id override
	MaxSteps int       // overrides the scenario's run.max_steps when > 0
	Duration float64   // overrides the scenario's run.duration_s when > 0
}

// runResult is what one run gives back to a command.
type runResult struct {
	Dir     string
	Summary record.Summary
	Result  hil.Result
}

// resolveScenario loads a scenario by file path or built-in name; every
// failure is a usage error (exit code 2).
func resolveScenario(arg string) (*scenarios.Scenario, error) {
	sc, err := scenarios.Resolve(arg)
	if err != nil {
		return nil, usageError{err}
	}
	return sc, nil
}

// loadBuiltin loads a scenario of the built-in library.
func loadBuiltin(name string) (*scenarios.Scenario, error) {
	return resolveScenario(scenarios.BuiltinPrefix + name)
}

// initialState gives the state a scenario starts from: the explicit one, or
// the natural gait of its walker (passive, or closed loop with the built-in
// controller) found by the gait finder.
func initialState(sc *scenarios.Scenario, model *plant.Model) (plant.State, error) {
	s, err := hil.InitialState(sc, model)
	if err == nil {
		return s, nil
	}
	if !errors.Is(err, hil.ErrNaturalGait) {
		return plant.State{}, usageError{err}
	}
	g, err := findGait(sc, model)
	if err != nil {
		return plant.State{}, err
	}
	if !g.Found {
		return plant.State{}, fmt.Errorf("scenario %s: the gait finder found no period-one gait to start from; give an explicit initial state", sc.Name)
	}
	return g.State, nil
}

// gaitPolicy is the policy the gait finder analyses for a scenario: nil for a
// passive walker, the built-in controller's law otherwise.
func gaitPolicy(sc *scenarios.Scenario, model *plant.Model) (plant.Policy, bool, error) {
	if sc.Controller.Link == scenarios.LinkNone || sc.Controller.Mode == reference.ModePassive {
		return nil, true, nil
	}
	if sc.Controller.Link != scenarios.LinkBuiltin {
		return nil, false, nil
	}
	g, err := reference.GainsFromSettings(sc.Controller.Settings)
	if err != nil {
		return nil, false, usageError{fmt.Errorf("scenario %s: controller.settings: %w", sc.Name, err)}
	}
	return reference.PlantPolicy(model, g), true, nil
}

// findGait runs the gait finder from the scenario's guess.
func findGait(sc *scenarios.Scenario, model *plant.Model) (plant.Gait, error) {
	policy, ok, err := gaitPolicy(sc, model)
	if err != nil {
		return plant.Gait{}, err
	}
	if !ok {
		return plant.Gait{}, badUsage("scenario %s: the gait finder needs a passive walker or the built-in controller (a pure function of the measured state); this scenario uses link %q", sc.Name, sc.Controller.Link)
	}
	guess, err := gaitGuess(sc, model)
	if err != nil {
		return plant.Gait{}, err
	}
	return plant.FindGait(model, policy, guess, plant.GaitOptions{})
}

// gaitGuess is the state the gait finder starts from: the scenario's explicit
// fields when given, else a symmetric stance with a typical stride.
func gaitGuess(sc *scenarios.Scenario, model *plant.Model) (plant.State, error) {
	copyScenario := *sc
	copyScenario.Initial.NaturalGait = false
	if len(copyScenario.Initial.LegAnglesRad) != 2 {
		copyScenario.Initial.LegAnglesRad = []float64{0.2, -0.2}
		copyScenario.Initial.LegRatesRadps = []float64{-1.2, -0.8}
	}
	s, err := hil.InitialState(&copyScenario, model)
	if err != nil {
		return plant.State{}, usageError{fmt.Errorf("scenario %s: no usable guess for the gait finder: %w", sc.Name, err)}
	}
	return s, nil
}

// openLink connects to the controller the scenario (or the override) names.
// The returned closer tears down everything the link started (reference
// firmware goroutine, embedded broker).
func openLink(sc *scenarios.Scenario, o runOptions, cfg *hil.Config) (bridges.Conn, string, func(), error) {
	spec, err := scenarioLink(sc, o)
	if err != nil {
		return nil, "", nil, err
	}
	ls := linkSetup{Spec: spec, Rig: o.Rig, Lockstep: cfg.Clock == hil.Lockstep}
	if ls.Firmware.Gains == nil {
		g, err := reference.GainsFromSettings(sc.Controller.Settings)
		if err != nil {
			return nil, "", nil, usageError{fmt.Errorf("scenario %s: controller.settings: %w", sc.Name, err)}
		}
		ls.Firmware.Gains = &g
	}
	if ls.Firmware.Mode == "" {
		ls.Firmware.Mode = sc.Controller.Mode
		if sc.Controller.Link == scenarios.LinkNone {
			ls.Firmware.Mode = reference.ModePassive
		}
	}
	if ls.Firmware.Actuators == 0 {
		ls.Firmware.Actuators = len(sc.JointNames())
	}
	if ls.Rig == "" {
		ls.Rig = sc.Controller.Rig
	}
	if spec.Kind == linkMQTT {
		if ls.User, ls.Password, err = mqttCredentials(sc); err != nil {
			return nil, "", nil, err
		}
	}
	l, err := dialLink(ls)
	if err != nil {
		return nil, "", nil, err
	}
	if l.Alarms != nil {
		cfg.Alarms = l.Alarms
	}
	return l.Conn, l.Name, l.Close, nil
}

// scenarioLink is the link a run uses: the override, else the scenario's.
func scenarioLink(sc *scenarios.Scenario, o runOptions) (linkSpec, error) {
	if o.Link != nil {
		return *o.Link, nil
	}
	c := sc.Controller
	switch c.Link {
	case scenarios.LinkBuiltin, scenarios.LinkNone:
		return linkSpec{Kind: linkBuiltin}, nil
	case scenarios.LinkSerial:
		return linkSpec{Kind: linkSerial, Port: c.Port, Baud: c.Baud}, nil
	case scenarios.LinkMQTT:
		if c.Broker == "" || c.Broker == "embedded" {
			return linkSpec{Kind: linkEmbedded}, nil
		}
		return linkSpec{Kind: linkMQTT, URL: c.Broker}, nil
	}
	return linkSpec{}, badUsage("scenario %s: controller.link %q is not supported here", sc.Name, c.Link)
}

// mqttCredentials reads the user name and password from the environment
// variables the scenario names.
func mqttCredentials(sc *scenarios.Scenario) (string, string, error) {
	get := func(name string) (string, error) {
		if name == "" {
			return "", nil
		}
		v, ok := os.LookupEnv(name)
		if !ok {
			return "", badUsage("scenario %s: environment variable %s (named by the controller block) is not set", sc.Name, name)
		}
		return v, nil
	}
	u, err := get(sc.Controller.UsernameEnv)
	if err != nil {
		return "", "", err
	}
	p, err := get(sc.Controller.PasswordEnv)
	return u, p, err
}

// newRunDir picks a fresh run folder below root.
func newRunDir(root, name string) string {
	if root == "" {
		root = "runs"
	}
	base := filepath.Join(root, name+"-"+time.Now().UTC().Format("20060102-150405"))
	dir := base
	for i := 2; ; i++ {
		if _, err := os.Stat(dir); os.IsNotExist(err) {
			return dir
		}
		dir = fmt.Sprintf("%s-%d", base, i)
	}
}

// lockstepWatchdogFloor is the shortest watchdog of a lockstep run. In
// lockstep simulated time stands still while the rig waits, so a slow reply
// costs nothing physical; the watchdog there only has to tell a dead
// firmware from a busy host. A loaded CI machine stalls a process for tens
// of milliseconds, and a 50 ms watchdog would trip on that and make lockstep
// results depend on the machine. One second tells the two apart (our
// choice). Wall-clock runs keep the scenario's watchdog as written.
const lockstepWatchdogFloor = time.Second

// runScenario carries out one scenario run end to end: model, initial state,
// link, run folder, loop, report.
func runScenario(ctx context.Context, sc *scenarios.Scenario, o runOptions) (runResult, error) {
	cfg, err := hil.FromScenario(sc)
	if err != nil {
		return runResult{}, usageError{err}
	}
	if o.Clock != "" {
		cfg.Clock = hil.ClockMode(o.Clock)
	}
	if o.MaxSteps > 0 {
		cfg.MaxSteps = o.MaxSteps
	}
	if o.Duration > 0 {
		cfg.Duration = o.Duration
	}
	if cfg.Clock == hil.Lockstep && cfg.Watchdog < lockstepWatchdogFloor {
		cfg.Watchdog = lockstepWatchdogFloor
	}
	model, err := hil.NewModel(sc, cfg)
	if err != nil {
		return runResult{}, usageError{err}
	}
	initial, err := initialState(sc, model)
	if err != nil {
		return runResult{}, err
	}
	conn, linkName, closeLink, err := openLink(sc, o, &cfg)
	if err != nil {
		return runResult{}, err
	}
	defer closeLink()
	if o.Log != nil {
		fmt.Fprintf(o.Log, "link: %s\n", linkName)
	}

	if o.Live != nil {
		live := o.Live
		cfg.OnStep = func(s hil.StepInfo) {
			fmt.Fprintf(live, "step %3d  t=%6.2f s  length %.3f m  speed %.2f m/s  peak friction use %3.0f%%  min normal %6.1f N\n",
				s.Index, s.SimTimeS, s.LengthM, s.SpeedMPS, 100*s.PeakUtil, s.MinNormal)
		}
	}
	if o.Log != nil {
		logw := o.Log
		cfg.Log = func(line string) { fmt.Fprintln(logw, line) }
	}

	m, err := hil.Manifest(sc, cfg, model, initial, linkName, toolVersion())
	if err != nil {
		return runResult{}, err
	}
	dir := o.RunDir
	if dir == "" {
		dir = newRunDir(o.OutRoot, sc.Name)
	}
	rec, err := record.Create(dir, m)
	if err != nil {
		return runResult{}, usageError{err}
	}
	res, err := hil.Run(ctx, cfg, model, initial, conn, rec)
	if err != nil {
		return runResult{Dir: dir}, fmt.Errorf("run %s: %w", sc.Name, err)
	}
	out := runResult{Dir: dir, Summary: res.Summary, Result: res}
	if o.Parquet {
		if _, err := record.ExportParquet(dir); err != nil {
			return out, fmt.Errorf("parquet export: %w", err)
		}
	}
	if o.Report {
		if err := report.WriteHTML(dir); err != nil {
			return out, fmt.Errorf("report: %w", err)
		}
	}
	if o.JUnit {
		if err := report.WriteRunJUnit(dir); err != nil {
			return out, fmt.Errorf("JUnit: %w", err)
		}
	}
	return out, nil
}

// outcomeCode is the exit code for a run outcome.
func outcomeCode(o record.Outcome) int {
	if o == record.Pass {
		return exitPass
	}
	return exitFail
}

// printSummary writes the plain-text verdict of one run.
func printSummary(w io.Writer, r runResult) {
	s := r.Summary
	fmt.Fprintf(w, "\noutcome: %s", strings.ToUpper(string(s.Outcome)))
	if s.Reason != "" {
		fmt.Fprintf(w, " (%s)", s.Reason)
	}
	fmt.Fprintf(w, "\nsteps %d, simulated %.2f s, mean speed %.3f m/s, peak friction utilization %.2f, min normal force %.1f N\n",
		s.Steps, s.SimTimeS, s.MeanSpeedMPS, s.PeakFrictionUtilization, s.MinNormalForceN)
	if s.LatencyUS != nil {
		fmt.Fprintf(w, "command latency p50 %.0f µs, p99 %.0f µs, max %.0f µs; deadline misses %d\n",
			s.LatencyUS.P50, s.LatencyUS.P99, s.LatencyUS.Max, s.DeadlineMisses)
	}
	if len(s.Alarms) > 0 {
		var parts []string
		for _, k := range sortedKeys(s.Alarms) {
			parts = append(parts, fmt.Sprintf("%s×%d", k, s.Alarms[k]))
		}
		fmt.Fprintf(w, "alarms: %s\n", strings.Join(parts, ", "))
	}
	for _, c := range s.Criteria {
		mark := "pass"
		if !c.Pass {
			mark = "FAIL"
		}
		fmt.Fprintf(w, "  [%s] %-28s value %-12s limit %s\n", mark, c.Name, fmtNum(c.Value), fmtNum(c.Limit))
	}
	fmt.Fprintf(w, "run folder: %s\n", r.Dir)
	if _, err := os.Stat(filepath.Join(r.Dir, report.HTMLFile)); err == nil {
		fmt.Fprintf(w, "report:     %s\n", filepath.Join(r.Dir, report.HTMLFile))
	}
}

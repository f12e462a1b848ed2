package rig

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"time"

	"gaitrig/bridges"
	"gaitrig/firmware/reference"
	"gaitrig/hil"
	"gaitrig/plant"
	"gaitrig/record"
	"gaitrig/report"
	"gaitrig/scenarios"
)

// Options are what a caller asks of one scenario run on top of the
// scenario itself. The zero value runs the scenario as written into a new
// folder under "runs".
type Options struct {
	// Link overrides the scenario's controller link, in --link syntax
	// ("builtin", "embedded", "pty", "serial:PORT[@BAUD]", "mqtt:URL"; see
	// ParseLink); "" keeps the scenario's link.
	Link string
	// Clock overrides the scenario's clock mode; "" keeps it.
	Clock hil.ClockMode
	// OutRoot is the parent of run folders (default "runs").
	OutRoot string
	// RunDir is the exact run folder to create; "" means
	// OutRoot/<scenario>-<UTC time>.
	RunDir string
	// Report, JUnit and Parquet ask for report.html, junit.xml (one case
	// per criterion) and telemetry.parquet after the run.
	Report, JUnit, Parquet bool
	// OnStep gets a line per step; nil for none. It runs on the loop:
	// keep it short.
	OnStep func(hil.StepInfo)
	// Log gets plain sentences about the run (the link used, handshake,
	// scheduling class); nil for none.
	Log func(line string)
	// Rig overrides the MQTT rig id.
	Rig string
	// MaxSteps > 0 overrides run.max_steps; < 0 removes the step limit
	// (the run then ends on its duration alone).
	MaxSteps int
	// Duration > 0 overrides run.duration_s.
	Duration float64

	// TickHz > 0 overrides the scenario's tick rate.
	TickHz float64
	// Watchdog > 0 overrides the scenario's watchdog.
	Watchdog time.Duration
	// Resend > 0 overrides the lockstep resend interval (hil.DefaultResend):
	// how long the rig waits for an answer before it sends the same state
	// again.
	Resend time.Duration
	// RealtimePriority, when not 0, overrides the SCHED_FIFO priority a
	// wall-clock run asks for (negative: ask for none).
	RealtimePriority int
	// LocalFirmware also connects the built-in firmware to an outside
	// MQTT broker (mqtt:URL links), for measuring a broker without a board.
	LocalFirmware bool
	// NoRecord runs without a run folder (Result.Dir is empty); Report,
	// JUnit and Parquet are then refused. For measurements that need only
	// the loop's result.
	NoRecord bool
	// Force starts a wall-clock run over a serial line even when a state
	// and a command take longer on the wire than a tick (CheckWireBudget);
	// the warning still goes to Log.
	Force bool

	// Tap, when set, receives decimated snapshots of the loop (the live
	// view); see hil.NewTap.
	Tap *hil.Tap
	// Watch, when set, also receives every alarm the loop logs, besides
	// the link's own alarm publishing (the live view).
	Watch hil.AlarmSink
}

// Result is what one run gives back.
type Result struct {
	// Dir is the run folder ("" with Options.NoRecord).
	Dir string
	// Summary is the run's summary as written to summary.json.
	Summary record.Summary
	// Loop is everything the loop returned (summary, link counters,
	// latency and jitter figures).
	Loop hil.Result
}

// Prepared is a run ready to start: configuration, model, initial state,
// an open link and a created run folder. Call Run once, then Close (Close
// alone releases the link and leaves the folder with what was written).
type Prepared struct {
	// Scenario is the scenario the run was prepared from.
	Scenario *scenarios.Scenario
	// Config is the loop configuration with every override applied.
	Config hil.Config
	// Model and Initial are the plant model and the state the run starts
	// from.
	Model   *plant.Model
	Initial plant.State // the state the run starts from (InitialState: the scenario's initial block, or its natural gait)
	// Link describes the open link (as in the manifest).
	Link string
	// Dir is the run folder ("" with Options.NoRecord).
	Dir string

	opts   Options
	open   Opened
	telem  *telemetry // the MQTT telemetry publisher; nil on other links
	rec    *record.Writer
	ran    bool
	closed bool
}

// Run is Prepare, (*Prepared).Run and Close in one call.
func Run(ctx context.Context, sc *scenarios.Scenario, o Options) (Result, error) {
	p, err := Prepare(ctx, sc, o)
	if err != nil {
		return Result{}, err
	}
	defer p.Close()
	return p.Run(ctx)
}

// Prepare builds everything a run needs: the loop configuration from the
// scenario with the overrides of o, the plant model, the initial state
// (the natural gait when the scenario asks for it), the link (dialled
// through the registry of link kinds) and the run folder with its
// manifest. On an error nothing stays open.
func Prepare(ctx context.Context, sc *scenarios.Scenario, o Options) (*Prepared, error) {
	if ctx == nil {
		ctx = context.Background()
	}
	if sc == nil {
		return nil, Configf("rig: no scenario")
	}
	if o.NoRecord && (o.Report || o.JUnit || o.Parquet) {
		return nil, Configf("rig: a run without a record cannot have a report, JUnit XML or Parquet export")
	}
	cfg, err := FromScenario(sc)
	if err != nil {
		return nil, ConfigError(err)
	}
	if err := applyOverrides(&cfg, o); err != nil {
		return nil, err
	}
	// A link that cannot be parsed is reported by the dial below.
	if wb, ok, err := CheckWireBudget(sc, o.Link, cfg.TickHz, cfg.Clock); err == nil && ok {
		if wb.Message != "" {
			if wb.Refuse && !o.Force {
				return nil, Configf("rig: %s; force the run (--force) to start it anyway", wb.Message)
			}
			if o.Log != nil {
				o.Log("warning: " + wb.Message)
			}
		}
		// A lockstep resend before the answer could have crossed the
		// line only doubles the traffic on a line that is already the
		// bottleneck: wait at least twice the wire time (our choice)
		// unless the caller set the resend interval.
		if floor := 2 * wb.Budget.Total; o.Resend == 0 && cfg.Resend < floor {
			cfg.Resend = floor
			if o.Log != nil {
				o.Log(fmt.Sprintf("lockstep resend interval raised to %v, twice the wire time at %d baud", floor, wb.Budget.Baud))
			}
		}
	}
	model, err := NewModel(sc, cfg)
	if err != nil {
		return nil, ConfigError(err)
	}
	initial, err := InitialState(sc, model)
	if err != nil {
		return nil, err
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	opened, err := dialScenario(sc, o, cfg.Clock == hil.Lockstep)
	if err != nil {
		return nil, err
	}
	if opened.Alarms != nil {
		cfg.Alarms = opened.Alarms
	}
	if opened.Notices != nil {
		cfg.Notices = opened.Notices
	}
	p := &Prepared{Scenario: sc, Config: cfg, Model: model, Initial: initial, Link: opened.Name, opts: o, open: opened}
	if o.Log != nil {
		o.Log("link: " + opened.Name)
	}
	p.Config.OnStep = o.OnStep
	p.Config.Log = o.Log
	p.Config.Tap = o.Tap
	p.Config.Alarms = teeAlarms(p.Config.Alarms, o.Watch)
	if pub, ok := opened.Conn.(telemetryPublisher); ok {
		// An MQTT rig also publishes its decoded telemetry for observers.
		if p.Config.Tap == nil {
			p.Config.Tap = hil.NewTap(0, false)
		}
		p.telem = &telemetry{pub: pub, rd: p.Config.Tap.NewReader(), scenario: sc.Name, clock: string(cfg.Clock), log: o.Log}
	}
	if o.NoRecord {
		return p, nil
	}
	m, err := Manifest(sc, p.Config, model, initial, opened.Name, ToolVersion())
	if err != nil {
		p.Close()
		return nil, err
	}
	p.Dir = o.RunDir
	if p.Dir == "" {
		p.Dir = NewRunDir(o.OutRoot, sc.Name)
	}
	if p.rec, err = record.Create(p.Dir, m); err != nil {
		p.Close()
		return nil, ConfigError(err)
	}
	return p, nil
}

// applyOverrides applies the options that change the loop configuration.
func applyOverrides(cfg *hil.Config, o Options) error {
	if o.Clock != "" {
		if o.Clock != hil.Lockstep && o.Clock != hil.Wallclock {
			return Configf("clock mode %q: want lockstep or wallclock", o.Clock)
		}
		cfg.Clock = o.Clock
	}
	switch {
	case o.MaxSteps > 0:
		cfg.MaxSteps = o.MaxSteps
	case o.MaxSteps < 0:
		cfg.MaxSteps = 0
	}
	if o.Duration > 0 {
		cfg.Duration = o.Duration
	}
	if o.TickHz > 0 {
		cfg.TickHz = o.TickHz
	}
	if o.Resend > 0 {
		cfg.Resend = o.Resend
	}
	if o.RealtimePriority != 0 {
		cfg.RealtimePriority = o.RealtimePriority
	}
	// No floor under a lockstep watchdog: the loop charges it only with
	// the firmware's answer time, never with the rig's own stalls
	// (hil/lockstep.go), so the scenario's value holds on a busy host.
	if o.Watchdog > 0 {
		cfg.Watchdog = o.Watchdog
	}
	c, err := cfg.WithDefaults()
	if err != nil {
		return ConfigError(err)
	}
	*cfg = c
	return nil
}

// dialScenario opens the link the options or the scenario name, with the
// built-in firmware (where the link starts it) set up as the scenario's
// controller block says.
func dialScenario(sc *scenarios.Scenario, o Options, lockstep bool) (Opened, error) {
	var l Link
	var err error
	if o.Link != "" {
		l, err = ParseLink(o.Link)
	} else {
		l, err = ScenarioLink(sc)
	}
	if err != nil {
		return Opened{}, err
	}
	d := DialSetup{Link: l, Rig: o.Rig, Lockstep: lockstep, LocalFirmware: o.LocalFirmware}
	g, err := reference.GainsFromSettings(sc.Controller.Settings)
	if err != nil {
		return Opened{}, Configf("scenario %s: controller.settings: %w", sc.Name, err)
	}
	d.Firmware.Gains = &g
	d.Firmware.Mode = sc.Controller.Mode
	if sc.Controller.Link == scenarios.LinkNone {
		d.Firmware.Mode = reference.ModePassive
	}
	d.Firmware.Actuators = len(sc.JointNames())
	if d.Rig == "" {
		d.Rig = sc.Controller.Rig
	}
	if l.Kind == "mqtt" {
		if d.User, d.Password, err = mqttCredentials(sc); err != nil {
			return Opened{}, err
		}
	}
	opened, err := Dial(d)
	return opened, linkOpenError(err)
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
			return "", Configf("scenario %s: environment variable %s (named by the controller block) is not set", sc.Name, name)
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

// NewRunDir picks a fresh run folder below root ("" means "runs"):
// root/<name>-<UTC time>, with -2, -3, … appended when that exists.
func NewRunDir(root, name string) string {
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

// Conn is the rig's end of the open link, for callers that check the
// link's own counters (bridges.Conn.Stats) after the run. It stays owned by
// the Prepared: do not close it.
func (p *Prepared) Conn() bridges.Conn { return p.open.Conn }

// Run runs the prepared loop to its end and writes what the options asked
// for on top of the record. The record is closed with the summary whatever
// happens; an error after the loop (a report that cannot be written) comes
// back with the Result filled.
func (p *Prepared) Run(ctx context.Context) (Result, error) {
	if p.ran {
		return Result{Dir: p.Dir}, fmt.Errorf("rig: run %s: already run", p.Scenario.Name)
	}
	if p.closed {
		return Result{Dir: p.Dir}, fmt.Errorf("rig: run %s: already closed", p.Scenario.Name)
	}
	p.ran = true
	rec := p.rec
	p.rec = nil
	if p.telem != nil {
		p.telem.start()
	}
	res, err := hil.Run(ctx, p.Config, p.Model, p.Initial, p.open.Conn, rec)
	if p.telem != nil {
		var sum *record.Summary
		if err == nil {
			sum = &res.Summary
		}
		p.telem.finish(sum)
	}
	if errors.Is(err, hil.ErrActuatorMismatch) {
		// Firmware and scenario do not belong together: the setup, not
		// the firmware's behaviour, is wrong (exit 2).
		err = ConfigError(err)
	}
	if err != nil {
		return Result{Dir: p.Dir}, fmt.Errorf("run %s: %w", p.Scenario.Name, err)
	}
	out := Result{Dir: p.Dir, Summary: res.Summary, Loop: res}
	if p.opts.Parquet {
		if _, err := record.ExportParquet(p.Dir); err != nil {
			return out, fmt.Errorf("parquet export: %w", err)
		}
	}
	if p.opts.Report {
		if err := report.WriteHTML(p.Dir); err != nil {
			return out, fmt.Errorf("report: %w", err)
		}
	}
	if p.opts.JUnit {
		if err := report.WriteRunJUnit(p.Dir); err != nil {
			return out, fmt.Errorf("JUnit: %w", err)
		}
	}
	return out, nil
}

// Close releases the link and stops what it started. A run folder that
// was never run is closed with an aborted summary, so it is complete and
// says why it holds no ticks. Close is safe to call more than once.
func (p *Prepared) Close() error {
	if p.closed {
		return nil
	}
	p.closed = true
	var err error
	if p.rec != nil {
		err = p.rec.Close(record.Summary{Outcome: record.Aborted, Reason: "prepared but never run"})
		p.rec = nil
	}
	if p.open.Close != nil {
		p.open.Close()
	}
	return err
}

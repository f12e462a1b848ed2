package rig

import (
	"context"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"gaitrig/hil"
	"gaitrig/record"
	"gaitrig/scenarios"
)

func TestFromScenarioMapsFaults(t *testing.T) {
	s, err := scenarios.LoadBuiltin("latency-stress")
	if err != nil {
		t.Fatal(err)
	}
	c, err := FromScenario(s)
	if err != nil {
		t.Fatal(err)
	}
	if c.Clock != hil.Wallclock || c.TickHz != 500 || c.Watchdog != 100*time.Millisecond {
		t.Errorf("clock %s at %g Hz, watchdog %v", c.Clock, c.TickHz, c.Watchdog)
	}
	want := []hil.LinkFault{
		{Kind: hil.FaultLatency, Fixed: 4 * time.Millisecond, Jitter: 2 * time.Millisecond},
		{Kind: hil.FaultDrop, Rate: 0.01, From: 2},
	}
	if len(c.LinkFaults) != len(want) {
		t.Fatalf("link faults %+v", c.LinkFaults)
	}
	for i := range want {
		if c.LinkFaults[i] != want[i] {
			t.Errorf("fault %d = %+v, want %+v", i, c.LinkFaults[i], want[i])
		}
	}
	for k, v := range s.Alarms {
		if c.Severity[k] != v {
			t.Errorf("alarm %s: severity %q, scenario says %q", k, c.Severity[k], v)
		}
	}

	s, err = scenarios.LoadBuiltin("push-recovery")
	if err != nil {
		t.Fatal(err)
	}
	if c, err = FromScenario(s); err != nil {
		t.Fatal(err)
	}
	f := s.Faults[0]
	if len(c.Pushes) != 1 || c.Pushes[0].AtStep != f.AtStep || c.Pushes[0].Force != [2]float64{f.ForceN[0], f.ForceN[1]} || c.Pushes[0].Duration != f.DurationS {
		t.Errorf("pushes %+v from scenario fault %+v", c.Pushes, f)
	}
}

func TestConfigErrorKeepsTextAndChain(t *testing.T) {
	inner := os.ErrNotExist
	err := ConfigError(inner)
	if !errors.Is(err, ErrConfig) || !errors.Is(err, os.ErrNotExist) || err.Error() != inner.Error() {
		t.Errorf("ConfigError(%v) = %v: is config %v, is not-exist %v", inner, err, errors.Is(err, ErrConfig), errors.Is(err, os.ErrNotExist))
	}
	if ConfigError(nil) != nil {
		t.Error("ConfigError(nil) is not nil")
	}
	if e := Configf("x %d", 1); e.Error() != "x 1" || !errors.Is(e, ErrConfig) {
		t.Errorf("Configf: %v", e)
	}
}

// The overrides reach the loop configuration and the manifest; the
// scenario's watchdog holds in lockstep too (there is no floor: the loop
// never charges the rig's own stalls to the firmware).
func TestPrepareAppliesOverrides(t *testing.T) {
	s, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "run")
	var logged []string
	p, err := Prepare(context.Background(), s, Options{RunDir: dir, Clock: hil.Lockstep, MaxSteps: 3, Duration: 7, TickHz: 500,
		Log: func(l string) { logged = append(logged, l) }})
	if err != nil {
		t.Fatal(err)
	}
	c := p.Config
	if c.Clock != hil.Lockstep || c.MaxSteps != 3 || c.Duration != 7 || c.TickHz != 500 || c.Watchdog != time.Duration(s.WatchdogMS*float64(time.Millisecond)) {
		t.Errorf("config after overrides: clock %s, %d steps, %g s, %g Hz, watchdog %v", c.Clock, c.MaxSteps, c.Duration, c.TickHz, c.Watchdog)
	}
	if len(logged) == 0 || !strings.HasPrefix(logged[0], "link: builtin") {
		t.Errorf("log %q, want the link first", logged)
	}
	// Closed without running: the folder is complete and says so.
	if err := p.Close(); err != nil {
		t.Fatal(err)
	}
	if err := p.Close(); err != nil {
		t.Errorf("second Close: %v", err)
	}
	if _, err := p.Run(context.Background()); err == nil {
		t.Error("a closed run ran")
	}
	run, err := record.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	if run.Summary == nil || run.Summary.Outcome != record.Aborted || run.Manifest.TickHz != 500 || run.Manifest.Clock != "lockstep" {
		t.Errorf("folder of a run never started: summary %+v, manifest %g Hz %s", run.Summary, run.Manifest.TickHz, run.Manifest.Clock)
	}

	p, err = Prepare(context.Background(), s, Options{NoRecord: true, Watchdog: 30 * time.Millisecond, MaxSteps: -1, Duration: 1})
	if err != nil {
		t.Fatal(err)
	}
	defer p.Close()
	if p.Dir != "" || p.Config.Watchdog != 30*time.Millisecond || p.Config.MaxSteps != 0 {
		t.Errorf("no-record run: dir %q, watchdog %v, max steps %d", p.Dir, p.Config.Watchdog, p.Config.MaxSteps)
	}
}

// What the user configured wrongly is an ErrConfig; nothing is left open.
func TestPrepareConfigErrors(t *testing.T) {
	s, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	exists := filepath.Join(t.TempDir(), "file")
	if err := os.WriteFile(exists, nil, 0o644); err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		name string
		o    Options
		want string
	}{
		{"link", Options{Link: "usb"}, "unknown link"},
		{"clock", Options{Clock: "fast"}, "lockstep or wallclock"},
		{"serial port", Options{Link: "serial:/nonexistent/tty", NoRecord: true}, "/nonexistent/tty"},
		{"run folder", Options{RunDir: filepath.Join(exists, "run")}, "file"},
		{"report without record", Options{NoRecord: true, Report: true}, "without a record"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			p, err := Prepare(context.Background(), s, tc.o)
			if err == nil {
				p.Close()
				t.Fatal("prepared")
			}
			if !errors.Is(err, ErrConfig) || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("%v: want a configuration error mentioning %q", err, tc.want)
			}
		})
	}
}

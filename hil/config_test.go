package hil

import (
	"strings"
	"testing"
	"time"

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
	if c.Clock != Wallclock || c.TickHz != 500 || c.Watchdog != 100*time.Millisecond {
		t.Errorf("clock %s at %g Hz, watchdog %v", c.Clock, c.TickHz, c.Watchdog)
	}
	want := []LinkFault{
		{Kind: FaultLatency, Fixed: 4 * time.Millisecond, Jitter: 2 * time.Millisecond},
		{Kind: FaultDrop, Rate: 0.01, From: 2},
	}
	if len(c.LinkFaults) != len(want) {
		t.Fatalf("link faults %+v", c.LinkFaults)
	}
	for i := range want {
		if c.LinkFaults[i] != want[i] {
			t.Errorf("fault %d = %+v, want %+v", i, c.LinkFaults[i], want[i])
		}
	}
	if c.severity(scenarios.AlarmDeadlineMiss) != scenarios.SeverityWarn || c.severity(scenarios.AlarmWatchdog) != scenarios.SeverityTrip {
		t.Error("severities not taken from the scenario and its defaults")
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

func TestConfigRefusesNonsense(t *testing.T) {
	base := Config{Duration: 1}
	tests := []struct {
		name string
		edit func(c *Config)
		want string
	}{
		{"no end", func(c *Config) { c.Duration = 0 }, "no end"},
		{"clock", func(c *Config) { c.Clock = "fast" }, "lockstep or wallclock"},
		{"tick rate", func(c *Config) { c.TickHz = -5 }, "tick rate"},
		{"drop rate", func(c *Config) { c.LinkFaults = []LinkFault{{Kind: FaultDrop, Rate: 1.5}} }, "rate 1.5"},
		{"fault kind", func(c *Config) { c.LinkFaults = []LinkFault{{Kind: "gremlin"}} }, "gremlin"},
		{"latency too long", func(c *Config) {
			c.LinkFaults = []LinkFault{{Kind: FaultLatency, Fixed: 2 * time.Second}}
		}, "at most"},
		{"force without duration", func(c *Config) { c.Pushes = []Push{{Force: [2]float64{10, 0}}} }, "no duration"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			c := base
			tc.edit(&c)
			_, err := c.withDefaults()
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("error %v, want one mentioning %q", err, tc.want)
			}
		})
	}
	if _, err := base.withDefaults(); err != nil {
		t.Fatalf("a plain config is refused: %v", err)
	}
}

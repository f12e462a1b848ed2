package hil

import (
	"strings"
	"testing"
	"time"
)

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

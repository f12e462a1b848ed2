package batch

import (
	"context"
	"math"
	"sync"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// slowStateConn makes the built-in firmware a firmware with state of its
// own, seen from the rig: an internal clock (a phase that advances with
// every state it is sent, as a central pattern generator's would) adds
// gain · sin(2π t/period) to the first joint's torque. The phase at a heel
// strike is not a function of the plant state there (the period, 1.3 s, is
// no multiple of the step's), so the plant state alone does not determine
// the next step.
type slowStateConn struct {
	bridges.Conn
	mu     sync.Mutex
	states int
	gain   float64 // N·m
}

func (c *slowStateConn) Send(m *protocol.Message) error {
	if m.Type == protocol.TypeState {
		c.mu.Lock()
		c.states++
		c.mu.Unlock()
	}
	return c.Conn.Send(m)
}

func (c *slowStateConn) Recv(deadline time.Time, m *protocol.Message) error {
	err := c.Conn.Recv(deadline, m)
	if err == nil && m.Type == protocol.TypeCommand {
		c.mu.Lock()
		m.Command.Torque[0] += float32(c.gain * math.Sin(2*math.Pi*float64(c.states)*1e-3/1.3))
		c.mu.Unlock()
	}
	return err
}

var registerSlowState sync.Once

// TestStabilitySaysSoWhenTheFirmwareHasState runs the estimate against a
// firmware with an internal clock (slowStateConn): the fit's residual
// must be larger than for the same law without the state and above the
// warning threshold, and the report must carry the warning.
func TestStabilitySaysSoWhenTheFirmwareHasState(t *testing.T) {
	if testing.Short() {
		t.Skip("lockstep walks")
	}
	registerSlowState.Do(func() {
		rig.RegisterLinkKind(rig.LinkKind{
			Name: "slow-state-test", Syntax: "slow-state-test", Help: "test kind: the built-in firmware with an internal clock",
			InProcess: true,
			Parse: func(s string) (rig.Link, bool, error) {
				return rig.Link{Kind: "slow-state-test"}, s == "slow-state-test", nil
			},
			Dial: func(d rig.DialSetup) (rig.Opened, error) {
				d.Link = rig.Link{Kind: "builtin"}
				o, err := rig.Dial(d)
				if err != nil {
					return o, err
				}
				o.Conn = &slowStateConn{Conn: o.Conn, gain: 1}
				o.Name = "slow-state-test"
				return o, nil
			},
		})
	})
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	plain, err := Stability{Dir: t.TempDir(), PushNs: -1, StepDownM: -1}.Run(context.Background(), sc)
	if err != nil {
		t.Fatal(err)
	}
	stateful, err := Stability{Dir: t.TempDir(), Link: "slow-state-test", PushNs: -1, StepDownM: -1}.Run(context.Background(), sc)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("residual: pure law %.3g, with an internal clock %.3g; radius %.3g vs %.3g", plain.Residual, stateful.Residual, plain.SpectralRadius, stateful.SpectralRadius)
	if !(stateful.Residual > ResidualWarning) || stateful.ResidualWarning == "" || plain.ResidualWarning != "" {
		t.Errorf("residual %.3g (warning %q) with a stateful firmware, %.3g without", stateful.Residual, stateful.ResidualWarning, plain.Residual)
	}
}

package batch

import (
	"context"
	"sync"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// slowStateConn makes the built-in firmware a firmware with state of its
// own, seen from the rig: it low-pass filters the IMU pitch rate the rig
// sends (time constant tau, longer than a step) and adds gain × the
// filtered value to the first joint's torque in every command. The
// filter's value at a heel strike is not a function of the plant state
// there, so the plant state alone does not determine the next step.
type slowStateConn struct {
	bridges.Conn
	mu       sync.Mutex
	filtered float64
	alpha    float64 // per tick
	gain     float64 // N·m per rad/s
}

func (c *slowStateConn) Send(m *protocol.Message) error {
	if m.Type == protocol.TypeState {
		c.mu.Lock()
		c.filtered += c.alpha * (float64(m.State.IMURate) - c.filtered)
		c.mu.Unlock()
	}
	return c.Conn.Send(m)
}

func (c *slowStateConn) Recv(deadline time.Time, m *protocol.Message) error {
	err := c.Conn.Recv(deadline, m)
	if err == nil && m.Type == protocol.TypeCommand {
		c.mu.Lock()
		m.Command.Torque[0] += float32(c.gain * c.filtered)
		c.mu.Unlock()
	}
	return err
}

var registerSlowState sync.Once

// TestStabilitySaysSoWhenTheFirmwareHasState runs the estimate against a
// firmware with a slow internal state (slowStateConn): the fit's residual
// must be larger than for the same law without the state and above the
// warning threshold, and the report must carry the warning.
func TestStabilitySaysSoWhenTheFirmwareHasState(t *testing.T) {
	if testing.Short() {
		t.Skip("lockstep walks")
	}
	registerSlowState.Do(func() {
		rig.RegisterLinkKind(rig.LinkKind{
			Name: "slow-state-test", Syntax: "slow-state-test", Help: "test kind: the built-in firmware with a slow state of its own",
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
				o.Conn = &slowStateConn{Conn: o.Conn, alpha: 1e-3 / 1.5, gain: 40}
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
	t.Logf("residual: pure law %.3g, with a slow state %.3g; radius %.3g vs %.3g", plain.Residual, stateful.Residual, plain.SpectralRadius, stateful.SpectralRadius)
	if !(stateful.Residual > ResidualWarning) || stateful.ResidualWarning == "" || plain.ResidualWarning != "" {
		t.Errorf("residual %.3g (warning %q) with a stateful firmware, %.3g without", stateful.Residual, stateful.ResidualWarning, plain.Residual)
	}
}

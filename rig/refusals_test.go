package rig

import (
	"context"
	"errors"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"

	"gaitrig/bridges/inproc"
	"gaitrig/bridges/protocol"
	"gaitrig/hil"
	"gaitrig/record"
	"gaitrig/scenarios"
)

// A client that connects to the embedded broker of a running rig with an
// id that is not one of ours is refused, and the refusal lands in the run's
// events.jsonl as a broker_refusal warning (issue 8: refusals leave a trace
// in the run record).
func TestEmbeddedBrokerRefusalsReachTheRunRecord(t *testing.T) {
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	dir := filepath.Join(t.TempDir(), "run")
	p, err := Prepare(ctx, sc, Options{Link: "embedded", Clock: hil.Lockstep, MaxSteps: 2, RunDir: dir})
	if err != nil {
		t.Fatal(err)
	}
	defer p.Close()
	url := regexp.MustCompile(`tcp://127\.0\.0\.1:\d+`).FindString(p.Link)
	if url == "" {
		t.Fatalf("link %q names no broker address", p.Link)
	}
	o := paho.NewClientOptions().AddBroker(url).SetClientID("board-7").SetProtocolVersion(4).SetConnectTimeout(5 * time.Second).SetAutoReconnect(false)
	// Protocol 3.1.1 only: paho otherwise tries 3.1 again after a refusal,
	// a second refusal.
	c := paho.NewClient(o)
	tok := c.Connect()
	if !tok.WaitTimeout(10*time.Second) || tok.Error() == nil {
		c.Disconnect(0)
		t.Fatalf("a client id that is not one of ours connected (%v)", tok.Error())
	}
	res, err := p.Run(ctx)
	if err != nil {
		t.Fatal(err)
	}
	// Two steps fail the scenario's min_steps; what matters is that the
	// refusal did not trip the run.
	if res.Summary.Outcome == record.Tripped || res.Summary.Steps != 2 {
		t.Fatalf("outcome %s after %d steps (%s): a refusal is a warning", res.Summary.Outcome, res.Summary.Steps, res.Summary.Reason)
	}
	if n := res.Summary.Alarms[hil.AlarmBrokerRefusal]; n != 1 {
		t.Fatalf("broker_refusal counted %d, want 1", n)
	}
	run, err := record.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	found := false
	for _, e := range run.Events {
		if e.Kind == hil.AlarmBrokerRefusal {
			found = e.Severity == record.Warn && strings.Contains(e.Message, "client_id") && strings.Contains(e.Message, `"board-7"`)
			t.Logf("event: %s", e.Message)
		}
	}
	if !found {
		t.Fatal("events.jsonl has no broker_refusal warning naming the client id")
	}
}

// A firmware that drives another number of actuators than the walker has
// joints is a setup error: rig.Run returns an error that is ErrConfig (the
// command line exits 2, as the README says for configuration problems),
// and the firmware gets stop reason mismatch.
func TestActuatorMismatchIsAConfigurationError(t *testing.T) {
	stops := make(chan protocol.Message, 1)
	RegisterLinkKind(LinkKind{
		Name: "three-arms", Syntax: "three-arms", Help: "test kind: a firmware with three actuators",
		Parse: exactly("three-arms"),
		Dial: func(d DialSetup) (Opened, error) {
			rigEnd, fw := inproc.Pair()
			go func() {
				var m protocol.Message
				m.Type = protocol.TypeGreeting
				m.Greeting = protocol.Greeting{Version: protocol.Version, Actuators: 3, Name: "three-arms"}
				fw.Send(&m)
				for fw.Recv(time.Now().Add(10*time.Second), &m) == nil {
					if m.Type == protocol.TypeStop {
						stops <- m
						return
					}
				}
			}()
			return Opened{Conn: rigEnd, Name: "three-arms", Close: func() { rigEnd.Close(); fw.Close() }}, nil
		},
	})
	t.Cleanup(func() {
		delete(linkKinds, "three-arms")
		linkOrder = slices.DeleteFunc(linkOrder, func(n string) bool { return n == "three-arms" })
	})
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	dir := filepath.Join(t.TempDir(), "run")
	_, err = Run(ctx, sc, Options{Link: "three-arms", MaxSteps: 2, RunDir: dir})
	if !errors.Is(err, ErrConfig) || !errors.Is(err, hil.ErrActuatorMismatch) {
		t.Fatalf("error %v: want a configuration error wrapping hil.ErrActuatorMismatch", err)
	}
	select {
	case m := <-stops:
		if m.Stop.Reason != protocol.StopMismatch {
			t.Fatalf("firmware got stop reason %d (%q), want %d mismatch", m.Stop.Reason, m.Stop.Text, protocol.StopMismatch)
		}
	case <-time.After(10 * time.Second):
		t.Fatal("the firmware got no stop")
	}
	run, err := record.Open(dir)
	if err != nil || run.Summary == nil || run.Summary.Alarms[hil.AlarmActuatorMismatch] != 1 {
		t.Fatalf("run folder: %v, summary %+v: want one actuator_mismatch alarm", err, run)
	}
}

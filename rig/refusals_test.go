package rig

import (
	"context"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"

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

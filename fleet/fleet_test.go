package fleet_test

import (
	"context"
	"encoding/json"
	"fmt"
	"gaitrig/internal/mqtttest"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"

	"gaitrig/bridges/broker"
	"gaitrig/bridges/topics"
	"gaitrig/fleet"
	"gaitrig/hil"
	"gaitrig/internal/headless"
	"gaitrig/record"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// TestFleetOfTwoRigsOnMosquitto runs two rigs against the built-in
// firmware over a real Mosquitto, each held to real time, watches them
// with the fleet page in headless Chromium, and checks the page lists
// both with their scenario, firmware and a drawn walker, and, once they
// end, their outcome and steps as their summaries say.
func TestFleetOfTwoRigsOnMosquitto(t *testing.T) {
	if ok, required := headless.Available(); !ok {
		if required {
			t.Fatal("chromium not found and GAITRIG_REQUIRE_TOOLS=1")
		}
		t.Skip("chromium not found")
	}
	addr := mqtttest.MosquittoAddr(t)
	broker := "tcp://" + addr
	w, err := fleet.Watch(fleet.Config{Broker: broker, Name: "test"})
	if err != nil {
		t.Fatal(err)
	}
	defer w.Close()
	srv, err := fleet.Serve(w, "", "")
	if err != nil {
		t.Fatal(err)
	}
	defer srv.Close()
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	b, err := headless.Start(t.TempDir(), 1200, 800, 60*time.Second)
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	if err := b.Navigate(srv.URL(), 20*time.Second); err != nil {
		t.Fatal(err)
	}
	// Rig ids of this test process alone: a shared Mosquitto
	// (GAITRIG_MOSQUITTO_ADDR) may hold other rigs' retained statuses.
	ids := []string{fmt.Sprintf("bench-a-%d", os.Getpid()), fmt.Sprintf("bench-b-%d", os.Getpid())}
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	results := make([]rig.Result, 2)
	var wg sync.WaitGroup
	for i, id := range ids {
		o := rig.Options{Link: "mqtt:" + broker, Rig: id, LocalFirmware: true, RunDir: filepath.Join(t.TempDir(), id),
			Duration: 120, MaxSteps: 6 + 2*i, Tap: hil.NewTap(0, true)}
		wg.Add(1)
		go func() {
			defer wg.Done()
			r, err := rig.Run(ctx, sc, o)
			if err != nil {
				t.Errorf("rig %s: %v", id, err)
			}
			results[i] = r
		}()
	}
	card := func(id, sel string) string {
		return fmt.Sprintf(`document.querySelector('.rig[data-rig=%q] %s')`, id, sel)
	}
	// While they walk: both listed, running, with a walker drawn.
	for _, id := range ids {
		if err := b.WaitFor(card(id, ".run")+` && `+card(id, ".run")+`.dataset.state === "running" && Number(`+card(id, ".steps")+`.textContent) >= 1`, 90*time.Second); err != nil {
			var html string
			if err := b.Eval(`document.documentElement.outerHTML.slice(0, 3000)`, &html, 10*time.Second); err != nil {
				html = err.Error()
			}
			t.Fatalf("%v\nthe watcher has %+v\nthe page shows %s", err, w.Rigs(), html)
		}
		var ink int
		if err := b.Eval(`(() => { const c = `+card(id, "canvas")+`; const d = c.getContext("2d").getImageData(0, 0, c.width, c.height).data; let n = 0;
			for (let i = 3; i < d.length; i += 4) if (d[i] > 0) n++; return n; })()`, &ink, 20*time.Second); err != nil {
			t.Fatal(err)
		}
		if ink < 50 {
			t.Errorf("rig %s: the small walker has %d drawn pixels", id, ink)
		}
		var text string
		if err := b.Eval(card(id, "dl")+`.textContent`, &text, 20*time.Second); err != nil {
			t.Fatal(err)
		}
		for _, want := range []string{"level-demo", "gaitrig-reference"} {
			if !contains(text, want) {
				t.Errorf("rig %s card %q lacks %q", id, text, want)
			}
		}
	}
	if dir := os.Getenv("GAITRIG_SCREENSHOT_DIR"); dir != "" {
		if shot, err := b.Screenshot(20 * time.Second); err == nil {
			os.WriteFile(filepath.Join(dir, "fleet.png"), shot, 0o644)
		}
	}
	wg.Wait()
	// After: each card shows the outcome and steps of its summary.
	for i, id := range ids {
		s := results[i].Summary
		if s.Outcome == "" {
			t.Fatalf("rig %s has no outcome", id)
		}
		if err := b.WaitFor(fmt.Sprintf(`%s.dataset.outcome === %q && %s.textContent === "%d"`, card(id, ".run"), s.Outcome, card(id, ".steps"), s.Steps), 30*time.Second); err != nil {
			t.Errorf("rig %s: %v (summary: %s after %d steps)", id, err, s.Outcome, s.Steps)
		}
	}
	var caution string
	if err := b.Eval(`document.getElementById("caution").textContent`, &caution, 20*time.Second); err != nil || caution != record.Caution {
		t.Errorf("caution %q %v", caution, err)
	}
	if n := w.Ignored(); n != 0 && os.Getenv("GAITRIG_MOSQUITTO_ADDR") == "" {
		t.Errorf("%d messages ignored", n)
	}
}

func contains(s, sub string) bool {
	return len(sub) == 0 || (len(s) >= len(sub) && indexOf(s, sub) >= 0)
}

func indexOf(s, sub string) int {
	for i := 0; i+len(sub) <= len(s); i++ {
		if s[i:i+len(sub)] == sub {
			return i
		}
	}
	return -1
}

// Bad settings are refused with a reason.
func TestWatchRefusesBadSettings(t *testing.T) {
	for _, c := range []fleet.Config{{Broker: "nonsense"}, {Broker: "http://x:1"}, {Broker: "tcp://127.0.0.1:1", Root: "a/b"}, {Broker: "tcp://127.0.0.1:1", Name: "x+y"}} {
		if _, err := fleet.Watch(c); err == nil {
			t.Errorf("%+v accepted", c)
		}
	}
}

// On the embedded broker (which knows clients by their id) the watcher
// connects as monitor.<name> and sees a rig's run through to its outcome,
// with the steps of its summary.
func TestFleetOnEmbeddedBroker(t *testing.T) {
	b, err := broker.Start(broker.Config{})
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	url := "tcp://" + b.Addr()
	w, err := fleet.Watch(fleet.Config{Broker: url, Name: "lab"})
	if err != nil {
		t.Fatal(err)
	}
	defer w.Close()
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	res, err := rig.Run(context.Background(), sc, rig.Options{Link: "mqtt:" + url, Rig: "bench-c", LocalFirmware: true,
		RunDir: filepath.Join(t.TempDir(), "run"), MaxSteps: 4, Duration: 60})
	if err != nil {
		t.Fatal(err)
	}
	// The last telemetry document is published before the rig's link
	// closes; wait (bounded, by counting polls) until it is in.
	for i := 0; ; i++ {
		rs := w.Rigs()
		if len(rs) == 1 && rs[0].Telemetry != nil && rs[0].Telemetry.State == "done" {
			tl := rs[0].Telemetry
			if rs[0].ID != "bench-c" || tl.Outcome != string(res.Summary.Outcome) || tl.Steps != res.Summary.Steps || tl.Ticks != res.Summary.Ticks {
				t.Errorf("the watcher saw %s: %s after %d steps, %d ticks; the summary says %s, %d, %d",
					rs[0].ID, tl.Outcome, tl.Steps, tl.Ticks, res.Summary.Outcome, res.Summary.Steps, res.Summary.Ticks)
			}
			if rs[0].Status == nil {
				t.Error("no status seen")
			}
			return
		}
		if i > 500 {
			t.Fatalf("the watcher has %+v after the run", rs)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// TestOutcomeBadgesInChromium: every run outcome a rig can publish gets a
// badge with its own word on the fleet page, so none is told by colour
// alone; "invalid" (host trouble, no verdict on the build) says so in
// words, with its meaning as the tooltip, and is drawn unlike "fail". The
// documents are published as rigs publish them (topics.RigTelemetry on
// <root>/<rig>/telemetry, as the rig's own client) on the embedded broker.
func TestOutcomeBadgesInChromium(t *testing.T) {
	if ok, required := headless.Available(); !ok {
		if required {
			t.Fatal("chromium not found and GAITRIG_REQUIRE_TOOLS=1")
		}
		t.Skip("chromium not found")
	}
	b, err := broker.Start(broker.Config{})
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	url := "tcp://" + b.Addr()
	w, err := fleet.Watch(fleet.Config{Broker: url, Name: "badges"})
	if err != nil {
		t.Fatal(err)
	}
	defer w.Close()
	srv, err := fleet.Serve(w, "", "")
	if err != nil {
		t.Fatal(err)
	}
	defer srv.Close()
	want := map[string]string{ // outcome → the badge's words
		string(record.Pass): "pass", string(record.Fail): "fail", string(record.Tripped): "tripped",
		string(record.Aborted): "aborted", string(record.Invalid): "invalid: host trouble",
	}
	for outcome := range want {
		id := "out-" + outcome
		c := paho.NewClient(paho.NewClientOptions().AddBroker(url).SetClientID(topics.ClientID(topics.RoleRig, id)).SetConnectTimeout(10 * time.Second))
		if tok := c.Connect(); !tok.WaitTimeout(20*time.Second) || tok.Error() != nil {
			t.Fatalf("rig %s: %v", id, tok.Error())
		}
		ts := 4.0
		doc, _ := json.Marshal(topics.RigTelemetry{Scenario: "level-demo", Firmware: "gaitrig-reference", Clock: "lockstep", State: "done",
			Outcome: outcome, Reason: "the reason of " + outcome, TimeS: &ts, Steps: 3})
		if tok := c.Publish(topics.Topic(topics.DefaultRoot, id, topics.Telemetry), 1, false, doc); !tok.WaitTimeout(20*time.Second) || tok.Error() != nil {
			t.Fatalf("rig %s: %v", id, tok.Error())
		}
		c.Disconnect(50)
	}
	br, err := headless.Start(t.TempDir(), 1200, 800, 60*time.Second)
	if err != nil {
		t.Fatal(err)
	}
	defer br.Close()
	if err := br.Navigate(srv.URL(), 20*time.Second); err != nil {
		t.Fatal(err)
	}
	badge := func(outcome string) string {
		return fmt.Sprintf(`document.querySelector('.rig[data-rig="out-%s"] .run .badge')`, outcome)
	}
	for outcome, words := range want {
		if err := br.WaitFor(badge(outcome)+` && `+badge(outcome)+`.textContent === `+fmt.Sprintf("%q", words), 60*time.Second); err != nil {
			var html string
			br.Eval(`document.getElementById("rigs").outerHTML.slice(0, 4000)`, &html, 10*time.Second)
			t.Fatalf("outcome %s: %v\n%s", outcome, err, html)
		}
		var cls string
		if err := br.Eval(badge(outcome)+`.className`, &cls, 20*time.Second); err != nil || !strings.Contains(cls, outcome) {
			t.Errorf("outcome %s: badge class %q %v", outcome, cls, err)
		}
	}
	var tip string
	if err := br.Eval(badge("invalid")+`.title`, &tip, 20*time.Second); err != nil || !strings.Contains(tip, "host") || !strings.Contains(tip, "the reason of invalid") {
		t.Errorf("the invalid badge's tooltip %q %v: want what it means and the run's reason", tip, err)
	}
	var bg [2]string
	for i, o := range []string{"invalid", "fail"} {
		if err := br.Eval(`getComputedStyle(`+badge(o)+`).backgroundColor`, &bg[i], 20*time.Second); err != nil {
			t.Fatal(err)
		}
	}
	if bg[0] == bg[1] {
		t.Errorf("invalid and fail badges share the background %s", bg[0])
	}
	if dir := os.Getenv("GAITRIG_SCREENSHOT_DIR"); dir != "" {
		if shot, err := br.Screenshot(20 * time.Second); err == nil {
			os.WriteFile(filepath.Join(dir, "fleet-outcomes.png"), shot, 0o644)
		}
	}
}

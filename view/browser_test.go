package view_test

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"gaitrig/internal/mqtttest"
	"image/png"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"gaitrig/hil"
	"gaitrig/internal/headless"
	"gaitrig/record"
	"gaitrig/rig"
	"gaitrig/scenarios"
	"gaitrig/view"
)

// Bounds of the browser tests: how long a page may take to show what the
// test waits for. They bound a hang; no assertion measures time.
const (
	startTimeout = 60 * time.Second
	waitTimeout  = 60 * time.Second
	callTimeout  = 20 * time.Second
)

// browser starts headless Chromium, skipping the test without one unless
// GAITRIG_REQUIRE_TOOLS=1.
func browser(t *testing.T) *headless.Browser {
	t.Helper()
	if ok, required := headless.Available(); !ok {
		if required {
			t.Fatal("chromium not found and GAITRIG_REQUIRE_TOOLS=1")
		}
		t.Skip("chromium not found: install the Debian package chromium to run the browser checks")
	}
	b, err := headless.Start(t.TempDir(), 1400, 1150, startTimeout)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(b.Close)
	return b
}

func evalInt(t *testing.T, b *headless.Browser, expr string) int {
	t.Helper()
	var n int
	if err := b.Eval(expr, &n, callTimeout); err != nil {
		t.Fatal(err)
	}
	return n
}

func evalString(t *testing.T, b *headless.Browser, expr string) string {
	t.Helper()
	var s string
	if err := b.Eval(expr, &s, callTimeout); err != nil {
		t.Fatal(err)
	}
	return s
}

func waitFor(t *testing.T, b *headless.Browser, expr string) {
	t.Helper()
	if err := b.WaitFor(expr, waitTimeout); err != nil {
		t.Fatal(err)
	}
}

// inkPixels counts the pixels of canvas id that are within 40 of colour
// rgb in each channel: the walker and the charts are drawn, not blank.
func inkPixels(t *testing.T, b *headless.Browser, id string, rgb [3]int) int {
	t.Helper()
	return evalInt(t, b, fmt.Sprintf(`(() => { const c = document.getElementById(%q);
		const d = c.getContext("2d").getImageData(0, 0, c.width, c.height).data; let n = 0;
		for (let i = 0; i < d.length; i += 4) if (Math.abs(d[i]-%d) < 40 && Math.abs(d[i+1]-%d) < 40 && Math.abs(d[i+2]-%d) < 40) n++;
		return n; })()`, id, rgb[0], rgb[1], rgb[2]))
}

// saveScreenshot writes a PNG of the page to $GAITRIG_SCREENSHOT_DIR (to
// look at, or to refresh docs/live-view.png) or to the test's temporary
// folder, and checks it decodes at the window's size.
func saveScreenshot(t *testing.T, b *headless.Browser, name string) {
	t.Helper()
	shot, err := b.Screenshot(callTimeout)
	if err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(bytes.NewReader(shot))
	if err != nil {
		t.Fatalf("screenshot: %v", err)
	}
	if r := img.Bounds(); r.Dx() < 1000 || r.Dy() < 700 {
		t.Errorf("screenshot is %v, want the 1400×1150 window", r)
	}
	dir := os.Getenv("GAITRIG_SCREENSHOT_DIR")
	if dir == "" {
		dir = t.TempDir()
	}
	path := filepath.Join(dir, name)
	if err := os.WriteFile(path, shot, 0o644); err != nil {
		t.Fatal(err)
	}
	t.Logf("screenshot: %s (%d bytes)", path, len(shot))
}

// stepTableMatches checks the page's step table against steps.csv of the
// run folder, read back by the record package (an independent path).
func stepTableMatches(t *testing.T, b *headless.Browser, dir string) {
	t.Helper()
	run, err := record.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	var rows [][]string
	if err := b.Eval(`Array.from(document.querySelectorAll("#steptable tbody tr")).map(r => Array.from(r.cells).map(c => c.textContent))`, &rows, callTimeout); err != nil {
		t.Fatal(err)
	}
	if len(rows) != len(run.Steps) || len(rows) == 0 {
		t.Fatalf("the page's step table has %d rows, steps.csv %d", len(rows), len(run.Steps))
	}
	for i, s := range run.Steps {
		want := []string{fmt.Sprint(s.Index), fmt.Sprintf("%.3f", s.DurationS), fmt.Sprintf("%.3f", s.LengthM), fmt.Sprintf("%.3f", s.SpeedMPS),
			fmt.Sprintf("%.3f", s.PeakUtilization), fmt.Sprintf("%.1f", s.MinNormalN), fmt.Sprintf("%.3f", s.EndS)}
		if fmt.Sprint(rows[i]) != fmt.Sprint(want) {
			t.Errorf("step row %d on the page %v, steps.csv %v", i, rows[i], want)
		}
	}
}

// Colours of the page (style.css, app.js) the pixel checks look for.
var (
	leftLeg  = [3]int{0x2f, 0x6f, 0x8f}
	rightLeg = [3]int{0xc0, 0x61, 0x2b}
)

// TestLiveViewInChromium runs the demo scenario in lockstep held to real
// time with the live view, loads the page in headless Chromium, and sees
// it update: the frame counter grows, the walker and the charts are drawn,
// steps fill the table; after the run is interrupted the page says so and
// its step table matches steps.csv.
func TestLiveViewInChromium(t *testing.T) {
	liveViewInChromium(t, rig.Options{Link: "builtin"}, "live-view.png")
}

// TestLiveViewOverMQTTInChromium is the same with the firmware on the other
// side of an MQTT broker: the embedded one, and a real Mosquitto
// (GAITRIG_MOSQUITTO_ADDR, or one started for the test; skipped without
// Mosquitto unless GAITRIG_REQUIRE_TOOLS=1). The page names the MQTT link.
func TestLiveViewOverMQTTInChromium(t *testing.T) {
	t.Run("embedded", func(t *testing.T) {
		liveViewInChromium(t, rig.Options{Link: "embedded", Rig: fmt.Sprintf("view-emb-%d", os.Getpid())}, "live-view-embedded.png")
	})
	t.Run("mosquitto", func(t *testing.T) {
		addr := mqtttest.MosquittoAddr(t)
		// A rig id of this process alone: a shared Mosquitto may serve others.
		liveViewInChromium(t, rig.Options{Link: "mqtt:tcp://" + addr, LocalFirmware: true, Rig: fmt.Sprintf("view-mosq-%d", os.Getpid())}, "live-view-mosquitto.png")
	})
}

// liveViewInChromium runs level-demo over the link of base with the live
// view, and checks the page in Chromium while it runs and after it is
// interrupted; shot names the screenshot.
func liveViewInChromium(t *testing.T, base rig.Options, shot string) {
	b := browser(t)
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	tap := hil.NewTap(0, true)
	live := view.NewLive(tap)
	dir := filepath.Join(t.TempDir(), "run")
	// Long enough that the run is still going whatever the machine's load;
	// the test ends it with its context.
	o := base
	o.RunDir, o.Duration, o.MaxSteps, o.Tap, o.Watch, o.OnStep, o.Log = dir, 120, -1, tap, live, live.Step, live.Note
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	p, err := rig.Prepare(ctx, sc, o)
	if err != nil {
		t.Fatal(err)
	}
	defer p.Close()
	srv, err := view.New(view.Config{Setup: view.Setup{Mode: "live", Scenario: sc.Name, Clock: string(p.Config.Clock), Link: p.Link,
		TickHz: p.Config.TickHz, Joints: p.Model.JointNames(), Plant: record.PlantOf(p.Model.Params()), Caution: record.Caution}})
	if err != nil {
		t.Fatal(err)
	}
	defer srv.Close()
	live.Start(srv)
	done := make(chan rig.Result, 1)
	go func() {
		r, err := p.Run(ctx)
		if err != nil {
			t.Error(err)
		}
		done <- r
	}()
	if err := b.Navigate(srv.URL(), callTimeout); err != nil {
		t.Fatal(err)
	}
	waitFor(t, b, `Number(document.getElementById("frames").dataset.count) >= 20 && document.querySelectorAll("#steptable tbody tr").length >= 3`)
	n1 := evalInt(t, b, `Number(document.getElementById("frames").dataset.count)`)
	t1 := evalString(t, b, `document.getElementById("simtime").textContent`)
	waitFor(t, b, fmt.Sprintf(`Number(document.getElementById("frames").dataset.count) >= %d`, n1+10))
	if t2 := evalString(t, b, `document.getElementById("simtime").textContent`); t2 == t1 {
		t.Errorf("simulated time on the page stayed at %s while frames came in", t1)
	}
	if st := evalString(t, b, `document.getElementById("state").dataset.state`); st != "running" {
		t.Errorf("state on the page %q during the run, want running", st)
	}
	if w := evalInt(t, b, `document.getElementById("walker").width`); w < 400 {
		t.Errorf("walker canvas is %d px wide", w)
	}
	if n := inkPixels(t, b, "walker", leftLeg); n < 100 {
		t.Errorf("the walker canvas has %d pixels of the left leg's colour: not drawn", n)
	}
	if n := inkPixels(t, b, "walker", rightLeg); n < 100 {
		t.Errorf("the walker canvas has %d pixels of the right leg's colour: not drawn", n)
	}
	for _, id := range []string{"c-util", "c-normal", "c-angle", "c-torque"} {
		if n := inkPixels(t, b, id, leftLeg); n < 50 {
			t.Errorf("chart %s has %d pixels of the left foot's or first joint's colour: no line drawn", id, n)
		}
	}
	if c := evalString(t, b, `document.getElementById("caution").textContent`); c != record.Caution {
		t.Errorf("the page's caution %q", c)
	}
	if fw := evalString(t, b, `document.getElementById("firmware").textContent`); !bytes.Contains([]byte(fw), []byte("gaitrig-reference")) {
		t.Errorf("the page does not name the firmware: %q", fw)
	}
	if link := evalString(t, b, `document.getElementById("link").textContent`); !strings.Contains(link, p.Link) || p.Link == "" {
		t.Errorf("the page names the link %q, the run %q", link, p.Link)
	}
	saveScreenshot(t, b, shot)
	cancel()
	var res rig.Result
	select {
	case res = <-done:
	case <-time.After(waitTimeout):
		t.Fatal("the run did not end after its context was cancelled")
	}
	live.Finish(&res.Summary, res.Dir)
	waitFor(t, b, `document.getElementById("state").dataset.state === "done" && document.getElementById("state").dataset.outcome === "aborted"`)
	stepTableMatches(t, b, dir)
	if srv.Viewers() != 1 {
		t.Errorf("%d viewers, want the one page", srv.Viewers())
	}
}

// TestReplayInChromium records a short run, plays it into the page, and
// works the controls: pause stops the frames, seek moves to the asked time
// and rebuilds the step table up to it, speed is taken.
func TestReplayInChromium(t *testing.T) {
	b := browser(t)
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "run")
	if _, err := rig.Run(context.Background(), sc, rig.Options{Link: "builtin", RunDir: dir, Duration: 4, MaxSteps: -1}); err != nil {
		t.Fatal(err)
	}
	rec, err := view.LoadRecording(dir)
	if err != nil {
		t.Fatal(err)
	}
	srv, err := view.New(view.Config{Setup: rec.Setup})
	if err != nil {
		t.Fatal(err)
	}
	defer srv.Close()
	srv.Play(rec)
	if err := b.Navigate(srv.URL(), callTimeout); err != nil {
		t.Fatal(err)
	}
	waitFor(t, b, `Number(document.getElementById("frames").dataset.count) >= 10`)
	if hidden := evalString(t, b, `String(document.getElementById("replay").hidden)`); hidden != "false" {
		t.Error("the replay controls are hidden in a replay")
	}
	// Pause: once the page shows it paused, no frame comes any more (the
	// stream is ordered, so frames sent before the pause are already in).
	if err := b.Eval(`document.getElementById("playpause").click()`, nil, callTimeout); err != nil {
		t.Fatal(err)
	}
	waitFor(t, b, `document.getElementById("playpause").dataset.paused === "1"`)
	paused := evalInt(t, b, `Number(document.getElementById("frames").dataset.count)`)
	// Seek to 2 s while paused: a frame at 2 s arrives, the table holds the
	// steps that ended by then.
	if err := b.Eval(`(() => { const s = document.getElementById("seek"); s.value = "2"; s.dispatchEvent(new Event("change")); })()`, nil, callTimeout); err != nil {
		t.Fatal(err)
	}
	// The frame shown is the last one at or before 2 s: frames are 1/ReplayRate apart.
	waitFor(t, b, fmt.Sprintf(`(t => t <= 2 && t > 2 - %g)(Number(document.getElementById("simtime").textContent))`, 1.0/view.ReplayRate+1e-9))
	run, err := record.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	want := 0
	for _, s := range run.Steps {
		if s.EndS <= 2 {
			want++
		}
	}
	waitFor(t, b, fmt.Sprintf(`document.querySelectorAll("#steptable tbody tr").length === %d`, want))
	after := evalInt(t, b, `Number(document.getElementById("frames").dataset.count)`)
	if after <= paused {
		t.Errorf("no frame after a seek: %d frames before, %d after", paused, after)
	}
	// Still paused: the position stays at 2 s through more play messages.
	waitFor(t, b, `/^2\.00 \//.test(document.getElementById("playpos").textContent)`)
	if err := b.Eval(`(() => { const s = document.getElementById("speed"); s.value = "4"; s.dispatchEvent(new Event("change")); })()`, nil, callTimeout); err != nil {
		t.Fatal(err)
	}
	waitFor(t, b, `/4×$/.test(document.getElementById("playpos").textContent)`)
	// Play to the end: the table then matches steps.csv.
	if err := b.Eval(`document.getElementById("playpause").click()`, nil, callTimeout); err != nil {
		t.Fatal(err)
	}
	waitFor(t, b, fmt.Sprintf(`document.getElementById("simtime").textContent === %q`, fmt.Sprintf("%.3f", run.Summary.SimTimeS)))
	stepTableMatches(t, b, dir)
	saveScreenshot(t, b, "replay-view.png")
}

// A bad control request is refused with a reason, and the playback goes on.
func TestReplayControlRefusesBadInput(t *testing.T) {
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "run")
	if _, err := rig.Run(context.Background(), sc, rig.Options{Link: "builtin", RunDir: dir, Duration: 0.5, MaxSteps: -1}); err != nil {
		t.Fatal(err)
	}
	rec, err := view.LoadRecording(dir)
	if err != nil {
		t.Fatal(err)
	}
	srv, err := view.New(view.Config{Setup: rec.Setup})
	if err != nil {
		t.Fatal(err)
	}
	defer srv.Close()
	srv.Play(rec)
	for _, body := range []string{`{"speed": 1000}`, `{"speed": -1}`, `{"seek": "x"}`, `{"rewind": true}`, `[1,2]`, string(bytes.Repeat([]byte(" "), 2000)) + `{}`} {
		code, text := post(t, srv.URL()+"control", body)
		if code != 400 || text == "" {
			t.Errorf("control %.40q: status %d %q, want 400 with a reason", body, code, text)
		}
	}
	if code, _ := post(t, srv.URL()+"control", `{"speed": 2, "seek": 0.25}`); code != 204 {
		t.Errorf("a good control request got %d", code)
	}
	if _, err := view.LoadRecording(t.TempDir()); err == nil {
		t.Error("an empty folder loads as a recording")
	} else if !errors.Is(err, os.ErrNotExist) && err.Error() == "" {
		t.Errorf("no reason given: %v", err)
	}
}

// TestKneedReplayInChromium replays a passive kneed walker's run: the page
// draws both legs, thigh and shank, while the frames come in.
func TestKneedReplayInChromium(t *testing.T) {
	b := browser(t)
	sc, err := scenarios.LoadBuiltin("passive-kneed-downhill")
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "run")
	if _, err := rig.Run(context.Background(), sc, rig.Options{RunDir: dir, MaxSteps: 4}); err != nil {
		t.Fatal(err)
	}
	rec, err := view.LoadRecording(dir)
	if err != nil {
		t.Fatal(err)
	}
	srv, err := view.New(view.Config{Setup: rec.Setup})
	if err != nil {
		t.Fatal(err)
	}
	defer srv.Close()
	srv.Play(rec)
	if err := b.Navigate(srv.URL(), callTimeout); err != nil {
		t.Fatal(err)
	}
	waitFor(t, b, `Number(document.getElementById("frames").dataset.count) >= 10`)
	if n := inkPixels(t, b, "walker", leftLeg); n < 100 {
		t.Errorf("the walker canvas has %d pixels of the left leg's colour: not drawn", n)
	}
	if n := inkPixels(t, b, "walker", rightLeg); n < 100 {
		t.Errorf("the walker canvas has %d pixels of the right leg's colour: not drawn", n)
	}
	saveScreenshot(t, b, "replay-kneed.png")
}

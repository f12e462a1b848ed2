package e2e

import (
	"bufio"
	"context"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	"gaitrig/batch"
	"gaitrig/bridges/serial"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// The envelope commands (margins, stability, preflight) against firmware
// that runs outside the rig's process: the Go reference firmware as its own
// process on a pty (`gaitrig firmware --link pty`, one process serving run
// after run, as one board on a bench does) and the example C firmware
// compiled with gcc (one process per run on a fresh pty, the firmware
// process the rig starts itself). Every search is small by design (two
// axes, a coarse grid and tolerance) and every run is lockstep, so the
// tests take a bounded number of runs and no wall-clock assertion.

// envelopeAxes are the margin axes searched here: one on the plant (the
// floor's friction) and one on the link (added latency).
var envelopeAxes = []string{"friction", "added_latency"}

// envelopeSearch is a coarse search: 4 grid points and a 10 % tolerance
// (our choice, to keep the test short; the default is 6 and 2 %).
func envelopeSearch(dir, link string, runner batch.RunFunc) batch.Margins {
	return batch.Margins{Dir: dir, Link: link, Jobs: 2, Grid: 4, Tolerance: 0.1, Runner: runner}
}

// envelopeScenario is level-demo with a 2 s watchdog: the firmware is
// another process on a shared host, and a lockstep run must not trip on
// the host's scheduling (as TestStabilityOfTheCFirmware does).
func envelopeScenario(t *testing.T) *scenarios.Scenario {
	t.Helper()
	base, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	sc, err := batch.Derive(base, "level-demo-process", "watchdog 2 s for a firmware process on a shared host", func(s *scenarios.Scenario) {
		s.WatchdogMS = 2000
	})
	if err != nil {
		t.Fatal(err)
	}
	return sc
}

// runCounter wraps rig.Run: it counts the runs made and the most that were
// in flight at once.
type runCounter struct {
	runs, inFlight, most atomic.Int64
	// log, when set, gets a line for each run: its folder, outcome and
	// wall time.
	log func(format string, args ...any)
}

func (c *runCounter) run(ctx context.Context, sc *scenarios.Scenario, o rig.Options) (rig.Result, error) {
	c.runs.Add(1)
	n := c.inFlight.Add(1)
	defer c.inFlight.Add(-1)
	for {
		m := c.most.Load()
		if n <= m || c.most.CompareAndSwap(m, n) {
			break
		}
	}
	start := time.Now()
	r, err := rig.Run(ctx, sc, o)
	if c.log != nil {
		c.log("run %s: %s %s (err %v) in %.1f s", filepath.Base(o.RunDir), r.Summary.Outcome, r.Summary.Reason, err, time.Since(start).Seconds())
	}
	return r, err
}

// cKinds numbers the link kinds registered for the C firmware, so that each
// test (and each -count repetition) registers a kind of its own name.
var cKinds atomic.Int64

// registerCFirmware registers a link kind whose every dial starts the C
// firmware (built by buildC) as a new process on a new pty pair and returns
// its name. The process ends with ctx or the test (startFirmware).
func registerCFirmware(t *testing.T, ctx context.Context, bin string) string {
	name := fmt.Sprintf("c-firmware-envelope-%d", cKinds.Add(1))
	rig.RegisterLinkKind(rig.LinkKind{
		Name: name, Syntax: name, Help: "test kind: the example C firmware as a new process on a new pty",
		Parse: func(s string) (rig.Link, bool, error) {
			return rig.Link{Kind: name}, s == name, nil
		},
		Dial: func(d rig.DialSetup) (rig.Opened, error) {
			p := openPty(t)
			startFirmware(t, ctx, bin, p.Path)
			conn := serial.NewConn(p.Master, "pty "+p.Path, serial.Config{})
			return rig.Opened{Conn: conn, Name: "C firmware over pty " + p.Path, Close: func() { conn.Close() }}, nil
		},
	})
	return name
}

// goFirmwareProcess is `gaitrig firmware --link pty` running as its own
// process: one pty for its whole life, a session for each rig run.
type goFirmwareProcess struct {
	port   string      // serial:/dev/pts/N, the rig's --link
	stdout *syncBuffer // everything it printed
	cmd    *exec.Cmd
	done   chan struct{}
}

// buildGaitrig builds the gaitrig command into a temporary folder.
func buildGaitrig(t *testing.T, ctx context.Context) string {
	t.Helper()
	gobin := requireTool(t, "go")
	bin := filepath.Join(t.TempDir(), "gaitrig")
	bctx, cancel := context.WithTimeout(ctx, 3*time.Minute)
	defer cancel()
	if out, err := exec.CommandContext(bctx, gobin, "build", "-o", bin, "gaitrig/cmd/gaitrig").CombinedOutput(); err != nil {
		t.Fatalf("go build gaitrig: %v\n%s", err, out)
	}
	return bin
}

// startGoFirmwareProcess builds the gaitrig command and starts `gaitrig
// firmware --link pty`; it returns once the process has printed its port.
func startGoFirmwareProcess(t *testing.T, ctx context.Context) *goFirmwareProcess {
	t.Helper()
	bin := buildGaitrig(t, ctx)
	// --idle: long enough for the built-in search between this process's
	// runs; the process is ended by the test in any case.
	f := &goFirmwareProcess{stdout: &syncBuffer{}, done: make(chan struct{})}
	f.cmd = exec.CommandContext(ctx, bin, "firmware", "--link", "pty", "--idle", "2m")
	f.cmd.WaitDelay = 2 * time.Second
	out, err := f.cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := f.cmd.Start(); err != nil {
		t.Fatal(err)
	}
	port := make(chan string, 1)
	go func() {
		defer close(f.done)
		sc := bufio.NewScanner(out)
		sent := false
		for sc.Scan() {
			line := sc.Text()
			f.stdout.Write([]byte(line + "\n"))
			if _, after, ok := strings.Cut(line, "--link "); ok && !sent {
				port <- strings.TrimSpace(after)
				sent = true
			}
		}
		_ = f.cmd.Wait()
	}()
	t.Cleanup(func() {
		_ = f.cmd.Process.Kill()
		<-f.done
		if t.Failed() {
			t.Logf("gaitrig firmware printed:\n%s", f.stdout.String())
		}
	})
	select {
	case f.port = <-port:
	case <-f.done:
		t.Fatalf("gaitrig firmware ended before printing its port:\n%s", f.stdout.String())
	case <-ctx.Done():
		t.Fatal("gaitrig firmware printed no port before the test's deadline")
	}
	return f
}

var sessionLine = regexp.MustCompile(`(?m)^reference firmware: run (\d+): (.*)$`)

// sessions returns what the process printed at the end of each session.
func (f *goFirmwareProcess) sessions() []string {
	var out []string
	for _, m := range sessionLine.FindAllStringSubmatch(f.stdout.String(), -1) {
		out = append(out, m[2])
	}
	return out
}

// checkLimitsAgree requires every axis of got to have a measured limit
// that agrees with want's within the search's tolerance (the wider of the
// two final brackets), and logs both.
func checkLimitsAgree(t *testing.T, label string, got, want []batch.AxisMargin) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("%s: %d axes, built-in %d", label, len(got), len(want))
	}
	for i, g := range got {
		w := want[i]
		t.Logf("%s: %s limit %.4g %s (bracket %.3g, %d grid + %d bisection runs); built-in %.4g (bracket %.3g)",
			label, g.Axis, g.Limit, g.Unit, g.Tolerance, len(g.Grid), len(g.Bisection), w.Limit, w.Tolerance)
		if g.NotMeasured != "" || g.Error != "" || math.IsNaN(g.Limit) {
			t.Errorf("%s: %s has no limit: not measured %q, error %q", label, g.Axis, g.NotMeasured, g.Error)
			continue
		}
		if g.Axis != w.Axis || g.Reached != w.Reached {
			t.Errorf("%s: axis %s reached %v; built-in %s reached %v", label, g.Axis, g.Reached, w.Axis, w.Reached)
		}
		if tol := math.Max(g.Tolerance, w.Tolerance); !(math.Abs(g.Limit-w.Limit) <= tol) {
			t.Errorf("%s: %s limit %g, built-in %g: more than the tolerance %g apart", label, g.Axis, g.Limit, w.Limit, tol)
		}
		if g.LastPass == nil || (g.Reached && g.FirstFail == nil) {
			t.Errorf("%s: %s lacks the runs that decided it (last pass %v, first fail %v)", label, g.Axis, g.LastPass, g.FirstFail)
		}
	}
}

// marginRuns counts the runs a search made (nominal excluded), attempts
// included.
func marginRuns(res []batch.AxisMargin) int64 {
	var n int64
	for _, a := range res {
		for _, r := range append(append([]batch.MarginRun{}, a.Grid...), a.Bisection...) {
			n += int64(r.Attempts)
		}
	}
	return n
}

// TestMarginsAgainstFirmwareProcesses runs `gaitrig margins`'s search on
// friction and added latency against the built-in firmware, the Go
// reference firmware as one process serving run after run over a pty (one
// board: its runs go one after the other, the firmware greeting again
// between them), and the C firmware as a new process per run. Both laws
// are the reference law to the bit (TestCLawMatchesGo) and lockstep runs
// are deterministic, so each limit must agree with the built-in one within
// the search's tolerance.
func TestMarginsAgainstFirmwareProcesses(t *testing.T) {
	if testing.Short() {
		t.Skip("about 60 lockstep walks of 30 steps over ptys")
	}
	b := buildC(t)
	ctx, cancel := context.WithTimeout(context.Background(), 6*time.Minute)
	defer cancel()
	sc := envelopeScenario(t)

	var builtin runCounter
	want, err := envelopeSearch(t.TempDir(), "builtin", builtin.run).Search(ctx, sc, envelopeAxes)
	if err != nil {
		t.Fatal(err)
	}
	for _, w := range want {
		if w.NotMeasured != "" || math.IsNaN(w.Limit) {
			t.Fatalf("built-in: %s not measured: %s", w.Axis, w.NotMeasured)
		}
	}
	t.Logf("built-in: %d runs, at most %d at once", builtin.runs.Load(), builtin.most.Load())

	t.Run("go-firmware-process", func(t *testing.T) {
		fw := startGoFirmwareProcess(t, ctx)
		c := runCounter{log: t.Logf}
		got, err := envelopeSearch(t.TempDir(), fw.port, c.run).Search(ctx, sc, envelopeAxes)
		if err != nil {
			t.Fatal(err)
		}
		checkLimitsAgree(t, "Go firmware process", got, want)
		if m := c.most.Load(); m != 1 {
			t.Errorf("one firmware process (one board): %d runs were in flight at once, want 1", m)
		}
		// One session per run, each ended by that run's own stop (a
		// normal end, or an e-stop where the walker failed): the
		// firmware greeted every run afresh. A stop lost on the way
		// (the serial link closed with it still queued) left the board
		// in the old session: the next run then got no greeting and its
		// stop said "run aborted by a rig error". The line for the last run
		// is printed after the rig closes, so wait for it (bounded by
		// the test's context: it comes at once on a working link).
		n := c.runs.Load()
		for len(fw.sessions()) < int(n) && ctx.Err() == nil {
			time.Sleep(20 * time.Millisecond)
		}
		s := fw.sessions()
		t.Logf("Go firmware process: %d runs (%d of them grid and bisection), %d sessions, at most %d run at once", n, marginRuns(got), len(s), c.most.Load())
		if int64(len(s)) != n {
			t.Errorf("the firmware process served %d sessions for %d runs", len(s), n)
		}
		for i, e := range s {
			if e != "the rig ended the run normally" && !strings.Contains(e, "e-stop") {
				t.Errorf("session %d ended: %s", i+1, e)
			}
		}
	})

	t.Run("c-firmware", func(t *testing.T) {
		kind := registerCFirmware(t, ctx, b.firmware)
		var c runCounter
		got, err := envelopeSearch(t.TempDir(), kind, c.run).Search(ctx, sc, envelopeAxes)
		if err != nil {
			t.Fatal(err)
		}
		checkLimitsAgree(t, "C firmware", got, want)
		t.Logf("C firmware: %d runs, at most %d at once", c.runs.Load(), c.most.Load())
		if m := c.most.Load(); m != 1 {
			t.Errorf("a link that is not in-process: %d runs were in flight at once, want 1", m)
		}
	})
}

// TestPreflightAgainstTheCFirmware runs what `gaitrig preflight` runs (the
// battery for the scenario, then the gate: a margin the scenario sets a
// minimum for, and the stability estimate) against the C firmware, a new
// process per run on a pty. It must reach a verdict with every check run
// and measured, and the stability estimate's spectral radius must agree
// with the built-in firmware's within the estimate's 95 % interval.
func TestPreflightAgainstTheCFirmware(t *testing.T) {
	if testing.Short() {
		t.Skip("about 30 lockstep walks over ptys")
	}
	b := buildC(t)
	ctx, cancel := context.WithTimeout(context.Background(), 6*time.Minute)
	defer cancel()
	kind := registerCFirmware(t, ctx, b.firmware)
	sc, err := batch.Derive(envelopeScenario(t), "level-demo-gated", "a lab minimum of 5 ms added latency, searched at 10 %", func(s *scenarios.Scenario) {
		s.Margins.Axes = []string{"added_latency"}
		s.Margins.MinAddedLatencyMS = 5 // our choice: a figure the demo firmware meets
		s.Margins.Tolerance = 0.1
	})
	if err != nil {
		t.Fatal(err)
	}

	pf := batch.Preflight{Dir: t.TempDir(), Link: kind, Jobs: 2, Checks: batch.BatteryFor(sc)}
	vs, err := pf.Variants(sc)
	if err != nil {
		t.Fatal(err)
	}
	res, err := pf.Run(ctx, vs)
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Checks) != len(pf.Checks) || len(res.Checks) == 0 {
		t.Fatalf("%d results for %d checks", len(res.Checks), len(pf.Checks))
	}
	for _, c := range res.Checks {
		t.Logf("check %s: pass %v, outcome %s %s, problems %v", c.Check.Name, c.Pass, c.Result.Summary.Outcome, c.Result.Summary.Reason, c.Problems)
		if c.Err != nil || c.Result.Dir == "" {
			t.Errorf("check %s was not run: %v", c.Check.Name, c.Err)
		}
		if _, err := os.Stat(filepath.Join(c.Result.Dir, "summary.json")); err != nil {
			t.Errorf("check %s left no summary: %v", c.Check.Name, err)
		}
	}

	g, err := batch.Gate{Dir: pf.Dir, Link: kind, Jobs: 2}.Run(ctx, sc)
	if err != nil {
		t.Fatal(err)
	}
	verdict := "NO-GO"
	if res.Go && g.Go {
		verdict = "GO"
	}
	t.Logf("preflight against the C firmware: battery go %v, gate go %v, verdict %s, failures %v", res.Go, g.Go, verdict, g.Failures)
	if len(g.Margins) != 1 || g.Margins[0].NotMeasured != "" || math.IsNaN(g.Margins[0].Limit) {
		t.Fatalf("gate margins: %+v", g.Margins)
	}
	t.Logf("gate: added_latency %.4g ms (required %g, meets %v)", g.Margins[0].Limit, g.Margins[0].Required, g.Margins[0].Meets)
	if g.Stability == nil {
		t.Fatalf("no stability estimate: %s", g.StabilityError)
	}
	c := *g.Stability
	want, err := batch.Stability{Dir: t.TempDir(), Link: "builtin", PushNs: -1, StepDownM: -1}.Run(ctx, sc)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("spectral radius: C firmware %.6f [%.6f, %.6f], %d pairs; built-in %.6f [%.6f, %.6f]",
		c.SpectralRadius, c.RadiusLow, c.RadiusHigh, c.Pairs, want.SpectralRadius, want.RadiusLow, want.RadiusHigh)
	if !(c.RadiusLow <= want.SpectralRadius && want.SpectralRadius <= c.RadiusHigh) {
		t.Errorf("the built-in radius %g lies outside the C firmware's interval [%g, %g]", want.SpectralRadius, c.RadiusLow, c.RadiusHigh)
	}
	// The verdict follows from what was measured: GO exactly when every
	// check passed, the margin met its minimum and the radius's upper
	// end is below the bound.
	allPass := true
	for _, ch := range res.Checks {
		allPass = allPass && ch.Pass
	}
	wantGo := allPass && g.Margins[0].Meets && c.RadiusHigh < g.MaxSpectralRadius
	if res.Go != allPass || (res.Go && g.Go) != wantGo {
		t.Errorf("verdict %s, but checks pass %v, margin meets %v, radius high %g vs bound %g", verdict, allPass, g.Margins[0].Meets, c.RadiusHigh, g.MaxSpectralRadius)
	}
}

// TestMarginsExitsThreeWhenTheBoardIsGone runs the `gaitrig margins`
// command against a board that goes away after its first run: the C
// firmware with --once on one end of a socat-linked pair, the rig on the
// other by path. The scenario as written is measured (the firmware's one
// session); then the firmware exits, and every grid point finds the port
// (socat still holds it) but no greeting within the handshake's 5 s, a run
// that could not be made. The axis is "not measured" (the host, not the
// firmware), and the command exits 3. Bounded by count: one walk and six
// handshakes that time out.
func TestMarginsExitsThreeWhenTheBoardIsGone(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the command; one walk and a dozen failed opens of about 2 s")
	}
	b := buildC(t)
	socat := requireTool(t, "socat")
	ctx, cancel := context.WithTimeout(context.Background(), 4*time.Minute)
	defer cancel()
	bin := buildGaitrig(t, ctx)
	fwPath, rigPath := socatPair(t, ctx, socat)
	fw := startFirmware(t, ctx, b.firmware, fwPath)

	dir := t.TempDir()
	base, err := os.ReadFile("../scenarios/library/level-demo.yaml")
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Replace(string(base), "name: level-demo", "name: level-demo-board-gone", 1) +
		"watchdog_ms: 2000\nmargins:\n  axes: [added_latency]\n  tolerance: 0.1\n"
	sc := filepath.Join(dir, "board-gone.yaml")
	if err := os.WriteFile(sc, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	cmd := exec.CommandContext(ctx, bin, "margins", "--json", "--retries", "1", "--link", "serial:"+rigPath, "--out", filepath.Join(dir, "out"), sc)
	out, err := cmd.Output()
	code := 0
	if ee, ok := err.(*exec.ExitError); ok {
		code = ee.ExitCode()
	} else if err != nil {
		t.Fatal(err)
	}
	if c := fw.wait(t, 10*time.Second); c != 0 {
		t.Errorf("the C firmware's one run ended with status %d", c)
	}
	t.Logf("gaitrig margins exited %d; %d runs not measured", code, strings.Count(string(out), `"not_measured"`))
	if code != 3 {
		t.Errorf("exit code %d, want 3 (an axis not measured, nothing missed)", code)
	}
	if !strings.Contains(string(out), `"not_measured"`) {
		t.Errorf("the JSON names no axis as not measured")
	}
}

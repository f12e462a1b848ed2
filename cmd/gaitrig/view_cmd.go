package main

// This file owns the command line of the live view: the --view and
// --view-pace flags of run and replay, and starting and ending the view
// server around a run. The view itself is package view.

import (
	"context"
	"fmt"
	"io"
	"net"
	"os"
	"time"

	"gaitrig/hil"
	"gaitrig/metrics"
	"gaitrig/record"
	"gaitrig/rig"
	"gaitrig/view"
)

// optAddr is a flag that may be given alone (--view: the default address)
// or with a value (--view=HOST:PORT). The flag package treats it as a
// boolean flag, so the value must be joined with "=".
type optAddr struct {
	set  bool
	addr string
}

func (o *optAddr) String() string {
	if o == nil || !o.set {
		return ""
	}
	return o.addr
}

func (o *optAddr) Set(v string) error {
	o.set = true
	switch v {
	case "true":
		o.addr = ""
	case "false":
		o.set = false
	default:
		o.addr = v
	}
	return nil
}

// IsBoolFlag lets --view stand alone.
func (o *optAddr) IsBoolFlag() bool { return true }

// Paces of a lockstep run under --view.
const (
	paceRealtime = "realtime"
	paceFree     = "free"
)

// viewFlags are --view and --view-pace, and --metrics for a run.
type viewFlags struct {
	addr    optAddr
	pace    *string
	metrics optAddr
	linger  *time.Duration // --metrics-linger
}

// addViewFlags declares --view (and, for a run, --view-pace).
func addViewFlags(c *cmdline, run bool) *viewFlags {
	v := &viewFlags{}
	what := "serve the live view page while the run goes"
	if !run {
		what = "serve the live view page playing the run back"
	}
	c.Var(&v.addr, "view", what+": on 127.0.0.1 at a free port\n"+
		"(printed), or at --view=HOST:PORT; an address that is not loopback needs the\n"+
		"token in "+view.TokenEnv)
	if run {
		c.Var(&v.metrics, "metrics", "serve Prometheus metrics of the run at http://127.0.0.1:<free port>/metrics\n"+
			"(printed), or at --metrics=HOST:PORT; an address that is not loopback needs\n"+
			"the token in "+view.TokenEnv+" (sent by Prometheus as a bearer token)")
		v.linger = c.Duration("metrics-linger", metrics.DefaultLinger, "with --metrics, keep serving the run's final values after it ends until one\n"+
			"scrape has read them, for at most `DURATION` (0: close at once; Ctrl-C ends the wait)")
		v.pace = c.String("view-pace", paceRealtime, "with --view, a lockstep run goes at `PACE`: realtime (held to the\n"+
			"wall clock, to watch) or free (as fast as it can; the page skips frames)")
	}
	return v
}

// check validates the flags before anything opens.
func (v *viewFlags) check() error {
	if v.pace != nil && *v.pace != paceRealtime && *v.pace != paceFree {
		return fmt.Errorf("--view-pace %q: want %s or %s", *v.pace, paceRealtime, paceFree)
	}
	if v.pace != nil && *v.pace != paceRealtime && !v.addr.set {
		return fmt.Errorf("--view-pace needs --view")
	}
	if v.linger != nil && *v.linger < 0 {
		return fmt.Errorf("--metrics-linger %v: want a duration ≥ 0", *v.linger)
	}
	for _, f := range []struct {
		name string
		a    *optAddr
	}{{"view", &v.addr}, {"metrics", &v.metrics}} {
		if !f.a.set || f.a.addr == "" {
			continue
		}
		host, _, err := net.SplitHostPort(f.a.addr)
		if err != nil {
			return fmt.Errorf("--%s=%s: want HOST:PORT", f.name, f.a.addr)
		}
		if !view.IsLoopback(host) && os.Getenv(view.TokenEnv) == "" {
			return fmt.Errorf("--%s=%s is not loopback: set %s to an access token first", f.name, f.a.addr, view.TokenEnv)
		}
	}
	return nil
}

// liveView is the view and the metrics of one run: set up before the run
// is prepared, started once it is, finished with its result.
type liveView struct {
	flags *viewFlags
	tap   *hil.Tap
	live  *view.Live // nil without --view
	srv   *view.Server
	out   io.Writer
	prom  *metrics.Exporter // nil without --metrics
	rig   string            // --rig, the metrics' rig label when given
	ended bool              // finish was called: the metrics hold final values
}

// newLiveView hooks a view and metrics into o when --view or --metrics was
// given; nil otherwise.
func newLiveView(v *viewFlags, o *rig.Options, out io.Writer) *liveView {
	if v == nil || (!v.addr.set && !v.metrics.set) {
		return nil
	}
	lv := &liveView{flags: v, out: out, rig: o.Rig}
	// Only a page needs the run held to the wall clock.
	lv.tap = hil.NewTap(0, v.addr.set && (v.pace == nil || *v.pace == paceRealtime))
	o.Tap = lv.tap
	if !v.addr.set {
		return lv
	}
	lv.live = view.NewLive(lv.tap)
	o.Watch = lv.live
	printStep, logLine := o.OnStep, o.Log
	o.OnStep = func(s hil.StepInfo) {
		if printStep != nil {
			printStep(s)
		}
		lv.live.Step(s)
	}
	o.Log = func(line string) {
		if logLine != nil {
			logLine(line)
		}
		lv.live.Note(line)
	}
	return lv
}

// start serves the page and the metrics of the prepared run p.
func (lv *liveView) start(p *rig.Prepared) error {
	sc := p.Scenario
	if lv.flags.metrics.set {
		prom, err := metrics.New(metrics.Config{Addr: lv.flags.metrics.addr, Token: os.Getenv(view.TokenEnv), Scenario: sc.Name, Rig: lv.rig}, lv.tap)
		if err != nil {
			return rig.ConfigError(err)
		}
		lv.prom = prom
		fmt.Fprintf(lv.out, "metrics: %s\n", prom.URL())
	}
	if lv.live == nil {
		return nil
	}
	setup := view.Setup{Mode: "live", Scenario: sc.Name, Clock: string(p.Config.Clock), Link: p.Link, TickHz: p.Config.TickHz,
		DurationS: p.Config.Duration, Joints: p.Model.JointNames(), Plant: record.PlantOf(p.Model.Params()), Caution: record.Caution}
	srv, err := view.New(view.Config{Addr: lv.flags.addr.addr, Token: os.Getenv(view.TokenEnv), Setup: setup})
	if err != nil {
		return rig.ConfigError(err)
	}
	lv.srv = srv
	lv.live.Start(srv)
	fmt.Fprintf(lv.out, "live view: %s\n", srv.URL())
	return nil
}

// finish shows the run's end on the page and in the metrics, and closes
// the page's server; the metrics stay up for linger.
func (lv *liveView) finish(sum *record.Summary, dir string) {
	lv.ended = true
	if lv.prom != nil {
		lv.prom.Finish(sum)
	}
	if lv.srv == nil {
		return
	}
	lv.live.Finish(sum, dir)
	if d := lv.srv.Dropped(); d > 0 {
		fmt.Fprintf(lv.out, "live view: %d frames dropped for slow viewers\n", d)
	}
	lv.srv.Close()
}

// linger keeps the metrics endpoint up with the run's final values until a
// scrape has read them (at most --metrics-linger, or until ctx ends), then
// closes it. Called once the run and its link are done.
func (lv *liveView) linger(ctx context.Context) {
	if lv.prom == nil {
		return
	}
	defer lv.prom.Close()
	max := *lv.flags.linger
	if !lv.ended || ctx.Err() != nil || max <= 0 {
		return
	}
	fmt.Fprintf(lv.out, "metrics: serving the final values at %s until a scrape reads them (at most %v; Ctrl-C ends the wait)\n", lv.prom.URL(), max)
	if lv.prom.Linger(ctx, max) {
		fmt.Fprintln(lv.out, "metrics: final values scraped; endpoint closed")
	} else {
		fmt.Fprintln(lv.out, "metrics: no scrape read the final values; endpoint closed")
	}
}

// playView serves the live view page playing the run folder dir until
// SIGINT or SIGTERM.
func playView(dir string, v *viewFlags, out io.Writer) error {
	rec, err := view.LoadRecording(dir)
	if err != nil {
		return rig.ConfigError(err)
	}
	srv, err := view.New(view.Config{Addr: v.addr.addr, Token: os.Getenv(view.TokenEnv), Setup: rec.Setup})
	if err != nil {
		return rig.ConfigError(err)
	}
	defer srv.Close()
	srv.Play(rec)
	fmt.Fprintf(out, "live view (replay of %s): %s\nCtrl-C ends it.\n", dir, srv.URL())
	ctx, stop := signalContext()
	defer stop()
	<-ctx.Done()
	return nil
}

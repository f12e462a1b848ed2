package main

import (
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"time"

	"gaitrig/bridges/broker"
	"gaitrig/firmware/reference"
	"gaitrig/report"
	"gaitrig/rig"
)

func init() {
	commands["report"] = command{"regenerate the HTML report (and JUnit XML) of a run folder", cmdReport}
	commands["replay"] = command{"re-run a recorded run with its recorded torques and compare", cmdReplay}
	commands["firmware"] = command{"run the reference firmware as its own process, as a board would", cmdFirmware}
	commands["broker"] = command{"run the embedded MQTT broker standalone for a bench", cmdBroker}
	jsonResults["replay"] = replayResult{}
}

// replayResult is what replay prints with --json.
type replayResult struct {
	RunFolder       string  `json:"run_folder"`       // the run folder replayed
	Ticks           int     `json:"ticks"`            // recorded ticks replayed
	Match           bool    `json:"match"`            // every q and v of every tick matched bit for bit
	FirstDivergence int64   `json:"first_divergence"` // first tick that differs, -1 if none
	Field           string  `json:"field,omitempty"`  // the first coordinate that differs (q2, v0, …)
	Recorded        float64 `json:"recorded"`         // that coordinate in the telemetry
	Replayed        float64 `json:"replayed"`         // and in the replay
	Truncated       bool    `json:"truncated"`        // the telemetry's last row was cut (a killed run)
	Verdict         string  `json:"verdict"`          // the result in a sentence
}

func cmdReport(args []string, stdout, stderr io.Writer) int {
	c := newCmdline("report", "RUNDIR", `
Writes RUNDIR/report.html (self-contained, SVG plots) from the recorded files,
and RUNDIR/junit.xml when --junit is given or the folder already has one (it
is then brought up to date).`, stdout, stderr)
	junit := c.Bool("junit", false, "also write junit.xml in the run folder, one test case per criterion")
	if done, code := c.parse(args); done {
		return code
	}
	if c.NArg() != 1 {
		return c.usageError("want exactly one RUNDIR, got %d arguments", c.NArg())
	}
	dir := c.Arg(0)
	if err := report.WriteHTML(dir); err != nil {
		return c.fail(rig.ConfigError(err))
	}
	fmt.Fprintln(stdout, "report:", filepath.Join(dir, report.HTMLFile))
	if _, err := os.Stat(filepath.Join(dir, report.JUnitFile)); *junit || err == nil {
		if err := report.WriteRunJUnit(dir); err != nil {
			return c.fail(rig.ConfigError(err))
		}
		fmt.Fprintln(stdout, "junit: ", filepath.Join(dir, report.JUnitFile))
	}
	return exitPass
}

func cmdReplay(args []string, stdout, stderr io.Writer) int {
	c := newCmdline("replay", "RUNDIR", `
Rebuilds the plant from the scenario text in the run's manifest, starts it
from the recorded initial state and drives it with the recorded applied
torques and hip forces, tick by tick. Says whether the trajectory matches the
record exactly (bit for bit) and, if not, the first tick and coordinate that
diverge. Exit code 0 on an exact match, 1 on a divergence, 2 for bad usage
or a folder that cannot be replayed.

With --view it then plays the recorded run into the live view page, with
pause, speed and seek, until SIGINT or SIGTERM; the exit code is still the
comparison's.`, stdout, stderr)
	vf := addViewFlags(c, false)
	c.jsonFlag()
	if done, code := c.parse(args); done {
		return code
	}
	if err := vf.check(); err != nil {
		return c.usageError("%v", err)
	}
	if c.NArg() != 1 {
		return c.usageError("want exactly one RUNDIR, got %d arguments", c.NArg())
	}
	res, err := rig.Replay(c.Arg(0))
	if err != nil {
		return c.fail(err)
	}
	code := exitPass
	if !res.Match {
		code = exitFail
	}
	if c.jsonMode() {
		code = c.printJSON(replayResult{RunFolder: c.Arg(0), Ticks: res.Ticks, Match: res.Match, FirstDivergence: res.FirstDivergence,
			Field: res.Field, Recorded: res.Recorded, Replayed: res.Replayed, Truncated: res.Truncated, Verdict: res.String()}, code)
	} else {
		fmt.Fprintln(stdout, res.String())
	}
	if vf.addr.set {
		if err := playView(c.Arg(0), vf, c.stderr); err != nil {
			return c.fail(err)
		}
	}
	return code
}

func cmdFirmware(args []string, stdout, stderr io.Writer) int {
	c := newCmdline("firmware", "", `
Runs the built-in reference firmware as its own process and connects to a rig
exactly as a board or controller process would: over a serial port, over a
new pseudo-terminal pair (with --link pty it prints the port the rig should
open), or over MQTT. Like a board, it greets again after each stop and
serves the next rig on the same link; it ends when the link closes or no rig
has spoken for --idle, with the exit status of the last run. --once ends it
after the first run instead.`, stdout, stderr)
	link := c.String("link", "", "where to serve, one of: "+firmwareLinks()+" (required)")
	rigID := c.String("rig", "bench", "MQTT rig id")
	mode := c.String("mode", reference.ModeWalk, `"walk" or "passive" (zero torques)`)
	actuators := c.Int("actuators", 2, "number of torques announced (2 for the torso walker, 1 for a compass walker)")
	userEnv := c.String("user-env", "", "environment variable holding the MQTT user name")
	passEnv := c.String("password-env", "", "environment variable holding the MQTT password")
	once := c.Bool("once", false, "end after the first run instead of greeting the next rig")
	idle := c.Duration("idle", 10*time.Second, "end when no rig has spoken for this long")
	if done, code := c.parse(args); done {
		return code
	}
	if c.NArg() != 0 {
		return c.usageError("takes no arguments, got %q", c.Args())
	}
	if *link == "" {
		return c.usageError("--link is required: one of %s", firmwareLinks())
	}
	if *idle <= 0 {
		return c.usageError("--idle %v: want a positive duration, e.g. 10s", *idle)
	}
	if l, err := rig.ParseLink(*link); err != nil {
		return c.usageError("%v", err)
	} else if !servable(l.Kind) {
		return c.usageError("--link %s: the firmware cannot be served over this link (it is the rig's side); want one of %s", *link, firmwareLinks())
	}
	runs := 0
	var last error
	o := reference.Options{Mode: *mode, Actuators: *actuators, IdleTimeout: *idle, GreetAgain: !*once, SessionEnded: func(err error) {
		runs++
		last = err
		if err == nil {
			fmt.Fprintf(stdout, "reference firmware: run %d: the rig ended the run normally\n", runs)
		} else {
			fmt.Fprintf(stdout, "reference firmware: run %d: %v\n", runs, err)
		}
	}}
	announce := func(line string) { fmt.Fprintln(stdout, line) }
	err := rig.ServeFirmware(*link, *rigID, os.Getenv(*userEnv), os.Getenv(*passEnv), o, announce)
	if runs == 0 {
		return c.fail(err) // never nil: Serve returns nil only after a run
	}
	if err != nil && err != last {
		// The link failed after runs were served (with --once, err is the
		// run's own result): say so, and let the last run decide the
		// status, as with a quiet end.
		fmt.Fprintln(stdout, "reference firmware: link ended:", err)
	}
	switch {
	case last == nil:
		return exitPass
	case errors.Is(last, reference.ErrRigStopped):
		return exitFail
	}
	return c.fail(last)
}

// servable reports whether gaitrig firmware can serve over a link kind.
func servable(kind string) bool {
	for _, k := range rig.LinkKinds() {
		if k.Name == kind {
			return k.FirmwareEnd != nil
		}
	}
	return false
}

// firmwareLinks lists the --link syntax gaitrig firmware serves over.
func firmwareLinks() string {
	var s []string
	for _, k := range rig.LinkKinds() {
		if k.FirmwareEnd != nil {
			s = append(s, k.Syntax)
		}
	}
	return strings.Join(s, ", ")
}

func cmdBroker(args []string, stdout, stderr io.Writer) int {
	c := newCmdline("broker", "", `
Runs the embedded MQTT broker on its own for a bench, until SIGINT. It listens
on loopback unless --listen names another address, which requires accounts:
credentials come from environment variables (never from files), one account
for the rig and one for the firmware of --rig. A firmware client may publish
only to its own rig's command and stop topics.`, stdout, stderr)
	listen := c.String("listen", "127.0.0.1:1883", "host:port to listen on")
	rigID := c.String("rig", "bench", "rig id the accounts belong to")
	rigUser := c.String("rig-user-env", "GAITRIG_RIG_USER", "environment variable with the rig account's user name")
	rigPass := c.String("rig-password-env", "GAITRIG_RIG_PASSWORD", "environment variable with the rig account's password")
	fwUser := c.String("firmware-user-env", "GAITRIG_FIRMWARE_USER", "environment variable with the firmware account's user name")
	fwPass := c.String("firmware-password-env", "GAITRIG_FIRMWARE_PASSWORD", "environment variable with the firmware account's password")
	cert := c.String("tls-cert", "", "PEM certificate file: speak TLS")
	key := c.String("tls-key", "", "PEM key file for --tls-cert")
	if done, code := c.parse(args); done {
		return code
	}
	if c.NArg() != 0 {
		return c.usageError("takes no arguments, got %q", c.Args())
	}
	cfg := broker.Config{Addr: *listen, TLSCertFile: *cert, TLSKeyFile: *key}
	if u, p := os.Getenv(*rigUser), os.Getenv(*rigPass); u != "" && p != "" {
		cfg.Accounts = append(cfg.Accounts, broker.Account{Username: u, Password: p, Role: broker.RoleRig, Rig: *rigID})
	}
	if u, p := os.Getenv(*fwUser), os.Getenv(*fwPass); u != "" && p != "" {
		cfg.Accounts = append(cfg.Accounts, broker.Account{Username: u, Password: p, Role: broker.RoleFirmware, Rig: *rigID})
	}
	b, err := broker.Start(cfg)
	if err != nil {
		return c.fail(rig.ConfigError(err))
	}
	defer b.Close()
	login := "anonymous (loopback only)"
	if len(cfg.Accounts) > 0 {
		login = fmt.Sprintf("%d accounts from the environment", len(cfg.Accounts))
	}
	fmt.Fprintf(stdout, "embedded broker listening on %s, login %s; topics %s/%s/…; SIGINT stops it\n", b.Addr(), login, broker.DefaultRoot, *rigID)
	ctx, stop := signalContext()
	defer stop()
	<-ctx.Done()
	fmt.Fprintf(stdout, "broker stopped; %d requests (connections, subscriptions, publishes) refused by the access rules\n", b.Refusals())
	return exitPass
}

package main

import (
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"

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
}

func cmdReport(args []string, stdout, stderr io.Writer) int {
	fs := newFlagSet("report", "RUNDIR", "Writes RUNDIR/report.html (self-contained, SVG plots) and RUNDIR/junit.xml from the recorded files.", stderr)
	junit := fs.Bool("junit", true, "also write junit.xml")
	if done, code := parseFlags(fs, args); done {
		return code
	}
	if fs.NArg() != 1 {
		fmt.Fprintln(stderr, "gaitrig report: want exactly one RUNDIR")
		return exitConfig
	}
	dir := fs.Arg(0)
	if err := report.WriteHTML(dir); err != nil {
		fmt.Fprintln(stderr, "gaitrig report:", err)
		return exitConfig
	}
	fmt.Fprintln(stdout, "report:", filepath.Join(dir, report.HTMLFile))
	if *junit {
		if err := report.WriteRunJUnit(dir); err != nil {
			fmt.Fprintln(stderr, "gaitrig report:", err)
			return exitConfig
		}
		fmt.Fprintln(stdout, "junit: ", filepath.Join(dir, report.JUnitFile))
	}
	return exitPass
}

func cmdReplay(args []string, stdout, stderr io.Writer) int {
	fs := newFlagSet("replay", "RUNDIR", `
Rebuilds the plant from the scenario text in the run's manifest, starts it
from the recorded initial state and drives it with the recorded applied
torques and hip forces, tick by tick. Says whether the trajectory matches the
record exactly (bit for bit) and, if not, the first tick and coordinate that
diverge. Exit code 0 on an exact match, 1 on a divergence.`, stderr)
	if done, code := parseFlags(fs, args); done {
		return code
	}
	if fs.NArg() != 1 {
		fmt.Fprintln(stderr, "gaitrig replay: want exactly one RUNDIR")
		return exitConfig
	}
	res, err := rig.Replay(fs.Arg(0))
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig replay:", err)
		return exitConfig
	}
	fmt.Fprintln(stdout, res.String())
	if !res.Match {
		return exitFail
	}
	return exitPass
}

func cmdFirmware(args []string, stdout, stderr io.Writer) int {
	fs := newFlagSet("firmware", "", `
Runs the built-in reference firmware as its own process and connects to a rig
exactly as a board or controller process would: over a serial port, over a
new pseudo-terminal pair (--link pty prints the port the rig should open), or over
MQTT. Ends when the rig sends stop.`, stderr)
	link := fs.String("link", "", `"serial:PORT[@BAUD]", "pty" or "mqtt:URL"`)
	rigID := fs.String("rig", "bench", "MQTT rig id")
	mode := fs.String("mode", reference.ModeWalk, `"walk" or "passive" (zero torques)`)
	actuators := fs.Int("actuators", 2, "number of torques announced (2 for the torso walker, 1 for a compass walker)")
	userEnv := fs.String("user-env", "", "environment variable holding the MQTT user name")
	passEnv := fs.String("password-env", "", "environment variable holding the MQTT password")
	if done, code := parseFlags(fs, args); done {
		return code
	}
	if *link == "" {
		fmt.Fprintln(stderr, "gaitrig firmware: --link is required: serial:PORT[@BAUD], pty or mqtt:URL")
		return exitConfig
	}
	o := reference.Options{Mode: *mode, Actuators: *actuators}
	announce := func(line string) { fmt.Fprintln(stdout, line) }
	err := rig.ServeFirmware(*link, *rigID, os.Getenv(*userEnv), os.Getenv(*passEnv), o, announce)
	switch {
	case err == nil:
		fmt.Fprintln(stdout, "reference firmware: the rig ended the run normally")
		return exitPass
	case errors.Is(err, reference.ErrRigStopped):
		fmt.Fprintln(stdout, "reference firmware:", err)
		return exitFail
	}
	fmt.Fprintln(stderr, "gaitrig firmware:", err)
	return exitCodeFor(err)
}

func cmdBroker(args []string, stdout, stderr io.Writer) int {
	fs := newFlagSet("broker", "", `
Runs the embedded MQTT broker on its own for a bench, until SIGINT. It listens
on loopback unless --listen names another address, which requires accounts:
credentials come from environment variables (never from files), one account
for the rig and one for the firmware of --rig. A firmware client may publish
only to its own rig's command and stop topics.`, stderr)
	listen := fs.String("listen", "127.0.0.1:1883", "host:port to listen on")
	rig := fs.String("rig", "bench", "rig id the accounts belong to")
	rigUser := fs.String("rig-user-env", "GAITRIG_RIG_USER", "environment variable with the rig account's user name")
	rigPass := fs.String("rig-password-env", "GAITRIG_RIG_PASSWORD", "environment variable with the rig account's password")
	fwUser := fs.String("firmware-user-env", "GAITRIG_FIRMWARE_USER", "environment variable with the firmware account's user name")
	fwPass := fs.String("firmware-password-env", "GAITRIG_FIRMWARE_PASSWORD", "environment variable with the firmware account's password")
	cert := fs.String("tls-cert", "", "PEM certificate file: speak TLS")
	key := fs.String("tls-key", "", "PEM key file for --tls-cert")
	if done, code := parseFlags(fs, args); done {
		return code
	}
	cfg := broker.Config{Addr: *listen, TLSCertFile: *cert, TLSKeyFile: *key}
	if u, p := os.Getenv(*rigUser), os.Getenv(*rigPass); u != "" && p != "" {
		cfg.Accounts = append(cfg.Accounts, broker.Account{Username: u, Password: p, Role: broker.RoleRig, Rig: *rig})
	}
	if u, p := os.Getenv(*fwUser), os.Getenv(*fwPass); u != "" && p != "" {
		cfg.Accounts = append(cfg.Accounts, broker.Account{Username: u, Password: p, Role: broker.RoleFirmware, Rig: *rig})
	}
	b, err := broker.Start(cfg)
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig broker:", err)
		return exitConfig
	}
	defer b.Close()
	login := "anonymous (loopback only)"
	if len(cfg.Accounts) > 0 {
		login = fmt.Sprintf("%d accounts from the environment", len(cfg.Accounts))
	}
	fmt.Fprintf(stdout, "embedded broker listening on %s, login %s; topics %s/%s/…; SIGINT stops it\n", b.Addr(), login, broker.DefaultRoot, *rig)
	ctx, stop := signalContext()
	defer stop()
	<-ctx.Done()
	fmt.Fprintf(stdout, "broker stopped; %d requests (connections, subscriptions, publishes) refused by the access rules\n", b.Refusals())
	return exitPass
}

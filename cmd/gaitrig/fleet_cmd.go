package main

import (
	"fmt"
	"io"
	"os"

	"gaitrig/fleet"
	"gaitrig/rig"
	"gaitrig/view"
)

func init() {
	commands["fleet"] = command{"a page listing every rig on an MQTT broker, live", cmdFleet}
}

func cmdFleet(args []string, stdout, stderr io.Writer) int {
	c := newCmdline("fleet", "", `
Connects to an MQTT broker as a read-only observer (client id
monitor.NAME) and serves a page listing every rig seen there: its status,
scenario, firmware, steps, outcome, latest alarms and a small live walker,
built only from what the rigs publish (their status, alarm and telemetry
topics, docs/protocol.md section 9). Works with the embedded broker and with
Mosquitto. Runs until SIGINT or SIGTERM.`, stdout, stderr)
	broker := c.String("broker", "", "the broker `URL`: tcp://HOST:PORT (ssl:// for TLS) (required)")
	name := c.String("name", "fleet", "observer `NAME`: the client id is monitor.NAME")
	addr := c.String("addr", "", "serve the page at `HOST:PORT` (default: 127.0.0.1, a free port); an\naddress that is not loopback needs the token in "+view.TokenEnv)
	userEnv := c.String("user-env", "", "environment variable holding the MQTT user name")
	passEnv := c.String("password-env", "", "environment variable holding the MQTT password")
	if done, code := c.parse(args); done {
		return code
	}
	if c.NArg() != 0 {
		return c.usageError("takes no arguments, got %q", c.Args())
	}
	if *broker == "" {
		return c.usageError("--broker is required (tcp://HOST:PORT)")
	}
	w, err := fleet.Watch(fleet.Config{Broker: *broker, Name: *name, Username: os.Getenv(*userEnv), Password: os.Getenv(*passEnv)})
	if err != nil {
		return c.fail(rig.ConfigError(err))
	}
	defer w.Close()
	srv, err := fleet.Serve(w, *addr, os.Getenv(view.TokenEnv))
	if err != nil {
		return c.fail(rig.ConfigError(err))
	}
	defer srv.Close()
	fmt.Fprintf(stderr, "fleet page: %s\nCtrl-C ends it.\n", srv.URL())
	ctx, stop := signalContext()
	defer stop()
	<-ctx.Done()
	return exitPass
}

package rig

import (
	"context"
	"fmt"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"time"

	"gaitrig/hil"
	"gaitrig/scenarios"
)

// LatencyLinks are the links MeasureLink knows, in the order the latency
// command measures them: inproc (channels in one process), pty (a real
// pseudo-terminal pair, COBS frames), embedded (the embedded MQTT broker on
// loopback), mosquitto (a Mosquitto broker).
var LatencyLinks = []string{"inproc", "pty", "embedded", "mosquitto"}

// MeasureLink runs the level-ground demo in wall-clock mode for ticks ticks
// at hz against the reference firmware over the named link (one of
// LatencyLinks), with no run folder, and returns the loop's result (round
// trip, jitter, deadline misses). mosqAddr is a running Mosquitto's
// host:port for the mosquitto link ("" starts /usr/sbin/mosquitto on a free
// loopback port); prio the SCHED_FIFO priority asked for. sched is what the
// loop said about the real-time scheduling class.
func MeasureLink(name string, ticks int, hz float64, mosqAddr string, prio int) (res hil.Result, sched string, err error) {
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		return hil.Result{}, "", err
	}
	o := Options{Clock: hil.Wallclock, TickHz: hz, Duration: float64(ticks) / hz, MaxSteps: -1,
		Watchdog:         time.Second, // measure, do not trip on a slow outlier
		RealtimePriority: prio, Rig: "latency", NoRecord: true}
	switch name {
	case "inproc":
		o.Link = "builtin"
	case "pty", "embedded":
		o.Link = name
	case "mosquitto":
		addr := mosqAddr
		if addr == "" {
			a, stop, err := StartMosquitto()
			if err != nil {
				return hil.Result{}, "", err
			}
			defer stop()
			addr = a
		}
		o.Link, o.LocalFirmware = "mqtt:tcp://"+addr, true
	default:
		return hil.Result{}, "", Configf("unknown link %q (want one of %s)", name, strings.Join(LatencyLinks, ", "))
	}
	o.Log = func(line string) {
		if sched == "" && strings.Contains(strings.ToLower(line), "sched") {
			sched = line
		}
	}
	ctx, cancel := context.WithTimeout(context.Background(), time.Duration(float64(time.Second)*o.Duration*3)+10*time.Second)
	defer cancel()
	r, err := Run(ctx, sc, o)
	return r.Loop, sched, err
}

// StartMosquitto starts /usr/sbin/mosquitto on a free loopback port and
// returns its address and a function that stops it. set_tcp_nodelay matters:
// without it Mosquitto's sends wait for Nagle's algorithm and the round trip
// of a 1 kHz state/command exchange grows from about 0.2 ms to over 1 ms
// (measured with this command on the development machine).
func StartMosquitto() (string, func(), error) {
	bin, err := exec.LookPath("mosquitto")
	if err != nil {
		if _, e := os.Stat("/usr/sbin/mosquitto"); e != nil {
			return "", nil, fmt.Errorf("mosquitto is not installed (Debian package mosquitto), or pass --mosquitto ADDR")
		}
		bin = "/usr/sbin/mosquitto"
	}
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		return "", nil, err
	}
	addr := l.Addr().String()
	l.Close()
	_, port, _ := net.SplitHostPort(addr)
	dir, err := os.MkdirTemp("", "gaitrig-mosquitto")
	if err != nil {
		return "", nil, err
	}
	conf := filepath.Join(dir, "mosquitto.conf")
	if err := os.WriteFile(conf, []byte("listener "+port+" 127.0.0.1\nallow_anonymous true\npersistence false\nset_tcp_nodelay true\n"), 0o600); err != nil {
		return "", nil, err
	}
	cmd := exec.Command(bin, "-c", conf)
	if err := cmd.Start(); err != nil {
		return "", nil, err
	}
	stop := func() { cmd.Process.Kill(); cmd.Wait(); os.RemoveAll(dir) }
	for deadline := time.Now().Add(5 * time.Second); time.Now().Before(deadline); time.Sleep(20 * time.Millisecond) {
		if c, err := net.Dial("tcp", addr); err == nil {
			c.Close()
			return addr, stop, nil
		}
	}
	stop()
	return "", nil, fmt.Errorf("mosquitto did not start listening on %s within 5 s", addr)
}

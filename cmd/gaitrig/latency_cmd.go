package main

import (
	"context"
	"fmt"
	"io"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"time"

	"gaitrig/hil"
	"gaitrig/rig"
)

func init() {
	commands["latency"] = command{"measure round-trip latency, tick jitter and deadline misses per link at 1 kHz", cmdLatency}
}

// latencyLinks are the links the latency command can measure, in the order
// it measures them.
var latencyLinks = []string{"inproc", "pty", "embedded", "mosquitto"}

func cmdLatency(args []string, stdout, stderr io.Writer) int {
	fs := newFlagSet("latency", "", `
Runs the demo walker in wall-clock mode against the reference firmware over
each link and prints the command round trip (state sent → its command back),
the tick start jitter (p50, p99, max) and the deadline-miss rate. Links:
inproc (channels in one process), pty (a real pseudo-terminal pair, COBS
frames), embedded (the embedded MQTT broker on loopback), mosquitto (a
Mosquitto broker: --mosquitto ADDR, or /usr/sbin/mosquitto started on a free
loopback port). The figures depend on the machine and its load: run it on the
bench PC that will host the rig.`, stderr)
	ticks := fs.Int("ticks", 10000, "ticks per link")
	hz := fs.Float64("hz", 1000, "tick rate")
	links := fs.String("links", strings.Join(latencyLinks, ","), "comma-separated links to measure")
	prio := fs.Int("rt-priority", hil.DefaultRealtimePriority, "SCHED_FIFO priority asked for the loop thread; negative asks for none")
	mosq := fs.String("mosquitto", os.Getenv("GAITRIG_MOSQUITTO_ADDR"), "host:port of a running Mosquitto broker (empty: start one)")
	if done, code := parseFlags(fs, args); done {
		return code
	}
	if *ticks < 100 || *hz <= 0 {
		fmt.Fprintln(stderr, "gaitrig latency: want --ticks ≥ 100 and --hz > 0")
		return exitConfig
	}
	fmt.Fprintf(stdout, "%-10s %8s %9s %9s %9s %9s %9s %9s %8s\n", "link", "ticks", "rtt p50", "rtt p99", "rtt max", "jit p50", "jit p99", "jit max", "misses")
	code := exitPass
	for _, name := range strings.Split(*links, ",") {
		name = strings.TrimSpace(name)
		res, err := measureLink(name, *ticks, *hz, *mosq, *prio)
		if err != nil {
			fmt.Fprintf(stdout, "%-10s could not measure: %v\n", name, err)
			code = exitFail
			continue
		}
		missRate := 100 * float64(res.DeadlineMisses) / float64(max(res.Summary.Ticks, 1))
		fmt.Fprintf(stdout, "%-10s %8d %7.0fµs %7.0fµs %7.0fµs %7.0fµs %7.0fµs %7.0fµs %7.3f%%\n", name, res.Summary.Ticks,
			res.Latency.P50, res.Latency.P99, res.Latency.Max, res.Jitter.P50, res.Jitter.P99, res.Jitter.Max, missRate)
		if res.Summary.Outcome == "tripped" {
			fmt.Fprintf(stdout, "%-10s note: the run tripped (%s)\n", "", res.Summary.Reason)
		}
	}
	if res := firstRealtime; res != "" {
		fmt.Fprintln(stdout, "scheduling:", res)
	}
	return code
}

// firstRealtime remembers what the loop said about the real-time scheduling
// class, printed once under the table.
var firstRealtime string

// measureLink runs one wall-clock measurement of the level-ground demo
// over the named link, with no run folder.
func measureLink(name string, ticks int, hz float64, mosqAddr string, prio int) (hil.Result, error) {
	sc, err := loadBuiltin("level-demo")
	if err != nil {
		return hil.Result{}, err
	}
	o := rig.Options{Clock: hil.Wallclock, TickHz: hz, Duration: float64(ticks) / hz, MaxSteps: -1,
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
			a, stop, err := startMosquitto()
			if err != nil {
				return hil.Result{}, err
			}
			defer stop()
			addr = a
		}
		o.Link, o.LocalFirmware = "mqtt:tcp://"+addr, true
	default:
		return hil.Result{}, badUsage("unknown link %q (want one of %s)", name, strings.Join(latencyLinks, ", "))
	}
	o.Log = func(line string) {
		if firstRealtime == "" && strings.Contains(strings.ToLower(line), "sched") {
			firstRealtime = line
		}
	}
	ctx, cancel := context.WithTimeout(context.Background(), time.Duration(float64(time.Second)*o.Duration*3)+10*time.Second)
	defer cancel()
	r, err := rig.Run(ctx, sc, o)
	return r.Loop, err
}

// startMosquitto starts /usr/sbin/mosquitto on a free loopback port and
// returns its address and a function that stops it. set_tcp_nodelay matters:
// without it Mosquitto's sends wait for Nagle's algorithm and the round trip
// of a 1 kHz state/command exchange grows from about 0.2 ms to over 1 ms
// (measured with this command on the development machine).
func startMosquitto() (string, func(), error) {
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

package main

import (
	"fmt"
	"io"
	"os"
	"strings"

	"gaitrig/hil"
	"gaitrig/rig"
)

func init() {
	commands["latency"] = command{"measure round-trip latency, tick jitter and deadline misses per link at 1 kHz", cmdLatency}
}

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
	links := fs.String("links", strings.Join(rig.LatencyLinks, ","), "comma-separated links to measure")
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
	realtime := ""
	for _, name := range strings.Split(*links, ",") {
		name = strings.TrimSpace(name)
		res, sched, err := rig.MeasureLink(name, *ticks, *hz, *mosq, *prio)
		if realtime == "" {
			realtime = sched
		}
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
	if realtime != "" {
		fmt.Fprintln(stdout, "scheduling:", realtime)
	}
	return code
}

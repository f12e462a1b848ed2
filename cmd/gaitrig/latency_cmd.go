package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"strings"
	"time"

	"gaitrig/bridges/protocol"
	"gaitrig/conformance"
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
bench PC that will host the rig.

With --link (serial:PORT[@BAUD], mqtt:URL, pty@BAUD, …) it measures that one
link instead, against whatever firmware is on it, with the plant frozen: the
firmware is greeted and configured, then --ticks states with fixed readings go
out one at a time, each as soon as the previous one was answered, so the
figure is the board's compute time plus the wiring, whatever a walker would
do. For a serial link it also prints the wire time the baud rate alone costs
(docs/protocol.md section 13).`, stderr)
	ticks := fs.Int("ticks", 10000, "ticks per link")
	hz := fs.Float64("hz", 1000, "tick rate")
	links := fs.String("links", strings.Join(rig.LatencyLinks, ","), "comma-separated links to measure")
	prio := fs.Int("rt-priority", hil.DefaultRealtimePriority, "SCHED_FIFO priority asked for the loop thread; negative asks for none")
	mosq := fs.String("mosquitto", os.Getenv("GAITRIG_MOSQUITTO_ADDR"), "host:port of a running Mosquitto broker (empty: start one)")
	link := fs.String("link", "", "measure this one link, plant frozen, against the firmware on it (see gaitrig run --help for the syntax)")
	rigID := fs.String("rig", "", "MQTT rig id for --link mqtt:URL (default bench)")
	if done, code := parseFlags(fs, args); done {
		return code
	}
	if *ticks < 100 || *hz <= 0 || *ticks > 10000000 {
		fmt.Fprintln(stderr, "gaitrig latency: want 100 ≤ --ticks ≤ 10000000 and --hz > 0")
		return exitConfig
	}
	if *link != "" {
		return latencyOfLink(*link, *rigID, *ticks, stdout, stderr)
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

// latencyOfLink measures one link with the plant frozen
// (conformance.MeasureRoundTrips) and prints the distribution.
func latencyOfLink(link, rigID string, n int, stdout, stderr io.Writer) int {
	l, err := rig.ParseLink(link)
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig latency:", err)
		return exitConfig
	}
	dial, err := conformance.LinkDialer(link, rigID)
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig latency:", err)
		return exitCodeFor(err)
	}
	ctx, stop := signalContext()
	defer stop()
	ctx, cancel := context.WithTimeout(ctx, time.Duration(n)*conformance.Watchdog+conformance.GreetingTimeout+10*time.Second)
	defer cancel()
	rt, err := conformance.MeasureRoundTrips(ctx, dial, n)
	if err != nil && len(rt.Samples) == 0 {
		fmt.Fprintln(stderr, "gaitrig latency:", err)
		return exitCodeFor(err)
	}
	s := rt.Summary
	fmt.Fprintf(stdout, "%-24s %8s %9s %9s %9s %11s\n", "link", "states", "rtt p50", "rtt p99", "rtt max", "unanswered")
	fmt.Fprintf(stdout, "%-24s %8d %7.0fµs %7.0fµs %7.0fµs %11d\n", link, s.Count, s.P50, s.P99, s.Max, rt.Unanswered)
	fmt.Fprintf(stdout, "firmware %q build %q; plant frozen (fixed readings), one state at a time\n", rt.Greeting.Name, rt.Greeting.Build)
	if l.Baud > 0 {
		w := protocol.SerialBudget(l.Baud, 0, 0)
		fmt.Fprintf(stdout, "wire time of a state and a command at %d baud: %.0fµs (a USB virtual serial port ignores the baud rate)\n",
			l.Baud, float64(w.Wire)/float64(time.Microsecond))
	}
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig latency:", err)
		return exitFail
	}
	if rt.Unanswered > 0 {
		return exitFail
	}
	return exitPass
}

package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"slices"
	"strings"
	"time"

	"gaitrig/bridges/protocol"
	"gaitrig/conformance"
	"gaitrig/hil"
	"gaitrig/internal/hostload"
	"gaitrig/record"
	"gaitrig/rig"
)

func init() {
	commands["latency"] = command{"measure round-trip latency, tick jitter and deadline misses per link at 1 kHz", cmdLatency}
	jsonResults["latency"] = latencyResult{}
}

// latencyResult is what latency prints with --json.
type latencyResult struct {
	Links      []linkLatency `json:"links"`      // one per measured link, in the order asked for
	Scheduling string        `json:"scheduling"` // the scheduling class the loop thread got
}

// linkLatency is one link's measurement.
type linkLatency struct {
	Link             string       `json:"link"`               // inproc, pty, embedded or mosquitto
	Ticks            int64        `json:"ticks"`              // ticks run
	RoundTripUS      *hil.Summary `json:"round_trip_us"`      // state sent → its command back; null when nothing was measured
	JitterUS         *hil.Summary `json:"jitter_us"`          // tick start lateness; null when nothing was measured
	DeadlineMisses   uint64       `json:"deadline_misses"`    // ticks whose work ended after the next tick was due
	DeadlineMissRate float64      `json:"deadline_miss_rate"` // misses per tick, 0…1
	Outcome          string       `json:"outcome,omitempty"`  // the measuring run's outcome
	Reason           string       `json:"reason,omitempty"`
	Error            string       `json:"error,omitempty"` // why the link could not be measured
}

func cmdLatency(args []string, stdout, stderr io.Writer) int {
	c := newCmdline("latency", "", `
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
(docs/protocol.md section 13); a state is waited for as the conformance
battery waits, without charging the firmware for time this host's CPUs were
contended. Exit code 0 when every link was measured, 1 when one could not be
(with --link: when a state went unanswered), 2 for bad usage, 3 with --link
when states went unanswered only while this host stayed contended.`, stdout, stderr)
	ticks := c.Int("ticks", 10000, "`N` ticks per link (at least 100)")
	hz := c.Float64("hz", 1000, "tick rate in `HZ`")
	links := c.String("links", strings.Join(rig.LatencyLinks, ","), "`LINKS` to measure, comma-separated, from: "+strings.Join(rig.LatencyLinks, ", "))
	prio := c.Int("rt-priority", hil.DefaultRealtimePriority, "SCHED_FIFO `PRIORITY` asked for the loop thread; negative asks for none")
	mosq := c.String("mosquitto", os.Getenv("GAITRIG_MOSQUITTO_ADDR"), "`HOST:PORT` of a running Mosquitto broker")
	c.defaultIs("mosquitto", "$GAITRIG_MOSQUITTO_ADDR; when empty, start one")
	link := c.String("link", "", "measure this one `LINK`, plant frozen, against the firmware on it (syntax as gaitrig run --link)")
	rigID := c.String("rig", "", "MQTT rig `ID` for --link mqtt:URL (default bench)")
	c.jsonFlag()
	if done, code := c.parse(args); done {
		return code
	}
	if c.NArg() != 0 {
		return c.usageError("takes no arguments, got %q", c.Args())
	}
	if *ticks < 100 || *hz <= 0 || *ticks > 10000000 {
		return c.usageError("want 100 ≤ --ticks ≤ 10000000 and --hz > 0")
	}
	if *link != "" {
		return latencyOfLink(*link, *rigID, *ticks, stdout, stderr)
	}
	var names []string
	for _, name := range strings.Split(*links, ",") {
		name = strings.TrimSpace(name)
		if !slices.Contains(rig.LatencyLinks, name) {
			return c.usageError("--links: unknown link %q (want some of %s)", name, strings.Join(rig.LatencyLinks, ", "))
		}
		names = append(names, name)
	}
	w := c.stdout
	if c.jsonMode() {
		w = io.Discard
	}
	fmt.Fprintf(w, "%-10s %8s %9s %9s %9s %9s %9s %9s %8s\n", "link", "ticks", "rtt p50", "rtt p99", "rtt max", "jit p50", "jit p99", "jit max", "misses")
	code := exitPass
	res := latencyResult{Links: []linkLatency{}}
	for _, name := range names {
		r, sched, err := rig.MeasureLink(name, *ticks, *hz, *mosq, *prio)
		if res.Scheduling == "" {
			res.Scheduling = sched
		}
		l := linkLatency{Link: name}
		if err != nil {
			l.Error = err.Error()
			res.Links = append(res.Links, l)
			fmt.Fprintf(w, "%-10s could not measure: %v\n", name, err)
			code = exitFail
			continue
		}
		lat, jit := r.Latency, r.Jitter
		l.Ticks = r.Summary.Ticks
		if lat.Count > 0 {
			l.RoundTripUS = &lat
		}
		if jit.Count > 0 {
			l.JitterUS = &jit
		}
		l.DeadlineMisses = r.DeadlineMisses
		l.DeadlineMissRate = float64(r.DeadlineMisses) / float64(max(r.Summary.Ticks, 1))
		l.Outcome, l.Reason = string(r.Summary.Outcome), r.Summary.Reason
		res.Links = append(res.Links, l)
		fmt.Fprintf(w, "%-10s %8d %7.0fµs %7.0fµs %7.0fµs %7.0fµs %7.0fµs %7.0fµs %7.3f%%\n", name, r.Summary.Ticks,
			lat.P50, lat.P99, lat.Max, jit.P50, jit.P99, jit.Max, 100*l.DeadlineMissRate)
		if r.Summary.Outcome == record.Tripped {
			fmt.Fprintf(w, "%-10s note: the run tripped (%s)\n", "", r.Summary.Reason)
		}
	}
	if c.jsonMode() {
		return c.printJSON(res, code)
	}
	if res.Scheduling != "" {
		fmt.Fprintln(w, "scheduling:", res.Scheduling)
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
	// A bound on a firmware that answers slowly: every state may take the
	// watchdog, and one (the measurement ends there) the contended-host
	// limit.
	ctx, cancel := context.WithTimeout(ctx, time.Duration(n)*conformance.Watchdog+hostload.Limit(conformance.Watchdog)+conformance.GreetingTimeout+10*time.Second)
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
	if rt.HostStalled > 0 {
		fmt.Fprintf(stdout, "%d states unanswered while the host's CPUs were contended: not counted against the firmware; measure again on a quieter host\n", rt.HostStalled)
	}
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig latency:", err)
		return exitFail
	}
	switch {
	case rt.Unanswered > 0:
		return exitFail
	case rt.HostStalled > 0:
		return exitInvalid
	}
	return exitPass
}

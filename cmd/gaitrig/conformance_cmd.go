package main

import (
	"fmt"
	"io"
	"os"

	"gaitrig/conformance"
	"gaitrig/rig"
)

func init() {
	commands["conformance"] = command{"check that a firmware speaks the protocol: a fixed battery over any link", cmdConformance}
	jsonResults["conformance"] = conformance.Report{}
}

func cmdConformance(args []string, stdout, stderr io.Writer) int {
	c := newCmdline("conformance", "", `
Runs a fixed battery of checks against the firmware at the other end of
--link, with the plant frozen (every state carries the same readings), and
prints each check with pass or fail and what was seen: the greeting, the
config and a duplicate config, every state answered with its seq within the
watchdog, a resent state, a frame with a bad CRC and one of an unknown type,
a heartbeat, the status bits, the round-trip time (p50, p99, max), a stop, a
greeting after the rig opens the link again, and a config the firmware cannot
drive. A state is judged by a watchdog that, as in a lockstep run, is charged
only with time in which the firmware could have answered: not while this
host's CPUs were contended. Exit code 0 when every required check passes, 1
when one does not, 2 when the link cannot be opened, 3 when no check failed
but one could not be judged because the host stayed contended (host_stall:
run it again on a quieter host). The expectations follow docs/protocol.md.`, stdout, stderr)
	link := c.String("link", "builtin", rig.LinkHelp())
	rigID := c.String("rig", "", "MQTT rig `ID` (default bench)")
	samples := c.Int("samples", 1000, "`N` states whose round trip is measured")
	asJSON := c.jsonFlag()
	junit := c.String("junit-file", "", "also write the report as JUnit XML to this `FILE`")
	if done, code := c.parse(args); done {
		return code
	}
	if c.NArg() != 0 || *samples < 1 || *samples > 1000000 {
		return c.usageError("takes no arguments; --samples must be 1 … 1000000")
	}
	dial, err := conformance.LinkDialer(*link, *rigID)
	if err != nil {
		return c.fail(err)
	}
	ctx, stop := signalContext()
	defer stop()
	o := conformance.Options{Samples: *samples}
	if !*asJSON {
		fmt.Fprintf(stdout, "conformance of the firmware on %s\n", *link)
		o.Log = func(line string) { fmt.Fprintln(stdout, line) }
	}
	rep, err := conformance.Run(ctx, *link, dial, o)
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig conformance:", err)
		return exitConfig
	}
	if *junit != "" {
		if err := writeConformanceJUnit(*junit, &rep); err != nil {
			fmt.Fprintln(stderr, "gaitrig conformance:", err)
			return exitConfig
		}
	}
	code, verdict := conformanceVerdict(&rep, ctx.Err() != nil)
	if *asJSON {
		return c.printJSON(rep, code)
	} else {
		if rt := rep.RoundTrip; rt.Count > 0 {
			fmt.Fprintf(stdout, "round trip, plant frozen: %d samples, p50 %.0f µs, p99 %.0f µs, max %.0f µs\n", rt.Count, rt.P50, rt.P99, rt.Max)
		}
		fmt.Fprintln(stdout, verdict)
		fmt.Fprintln(stdout, "\n"+safetyCaution)
	}
	return code
}

// conformanceVerdict is the exit code and the closing line of a battery's
// report: a required check that failed or could not run fails it (as does
// an interrupt); with none of those, one that could not be judged on a
// loaded host (host_stall) gives no verdict, exit code 3, as a run the
// host spoiled does.
func conformanceVerdict(rep *conformance.Report, interrupted bool) (int, string) {
	failed, notRun, hostStalled := 0, 0, 0
	for _, c := range rep.Checks {
		switch {
		case c.Required && c.Status == conformance.Fail:
			failed++
		case c.Required && c.Status == conformance.NotRun:
			notRun++
		case c.Required && c.Status == conformance.HostStall:
			hostStalled++
		}
	}
	switch {
	case failed > 0 || notRun > 0 || interrupted || (!rep.Passed && hostStalled == 0):
		v := fmt.Sprintf("FAIL: %d required checks failed, %d could not run", failed, notRun)
		if interrupted {
			v += " (interrupted)"
		}
		if hostStalled > 0 {
			v += fmt.Sprintf(", %d could not be judged on this loaded host", hostStalled)
		}
		return exitFail, v
	case hostStalled > 0:
		return exitInvalid, fmt.Sprintf("NO VERDICT: %d required checks could not be judged on this loaded host (host_stall); run the battery again on a quieter host", hostStalled)
	}
	return exitPass, "PASS: every required check passed"
}

func writeConformanceJUnit(path string, rep *conformance.Report) error {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	if err := rep.WriteJUnit(f); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

package main

import (
	"encoding/json"
	"fmt"
	"io"
	"runtime"

	"gaitrig/batch"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// runSeeds is `gaitrig run --seeds N`: the scenario with N seeds of sensor
// noise, drops and latency (sensors.seed, sensors.seed+1, …), the pass
// rate with its 95 % Wilson interval and the worst run. Exit code 0 when
// every seed passed.
func runSeeds(sc *scenarios.Scenario, o rig.Options, n int, asJSON bool, stdout, stderr io.Writer) int {
	dir, err := batch.NewDir(o.OutRoot, "seeds")
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig run:", err)
		return exitConfig
	}
	o.OnStep, o.RunDir = nil, ""
	ctx, stop := signalContext()
	defer stop()
	res, err := batch.RunSeeds(ctx, batch.Scheduler{Jobs: runtime.NumCPU()}, sc, n, o, dir)
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig run:", err)
		return exitCodeFor(err)
	}
	if asJSON {
		enc := json.NewEncoder(stdout)
		enc.SetIndent("", "  ")
		if err := enc.Encode(rig.JSONSafe(res)); err != nil {
			fmt.Fprintln(stderr, "gaitrig run:", err)
			return exitFail
		}
	} else {
		printSeeds(stdout, res)
	}
	if res.Passed != res.N {
		return exitFail
	}
	if res.Invalid > 0 {
		return exitInvalid // the rate is over fewer seeds than asked
	}
	return exitPass
}

func printSeeds(w io.Writer, r batch.SeedsResult) {
	fmt.Fprintf(w, "%s over %d seeds: %d passed, pass rate %.3f (95 %% Wilson interval %.3f … %.3f)\n", r.Scenario, r.N, r.Passed, r.Rate, r.Low, r.High)
	if r.Invalid > 0 {
		fmt.Fprintf(w, "%d more seeds ran invalid (the host stalled them) and are left out of the rate: run them again on a quieter host\n", r.Invalid)
	}
	for _, s := range r.Runs {
		fmt.Fprintf(w, "  seed %-6d %-8s %3d steps  %s\n", s.Seed, s.Outcome, s.Steps, s.Reason)
	}
	if len(r.Runs) > 0 {
		worst := r.Runs[r.Worst]
		fmt.Fprintf(w, "worst run: seed %d, %s, %d steps: %s\n", worst.Seed, worst.Outcome, worst.Steps, worst.Dir)
	}
	fmt.Fprintln(w)
	fmt.Fprintln(w, r.Caution)
}

package main

import (
	"fmt"
	"io"
	"os"

	"gaitrig/compare"
	"gaitrig/rig"
)

func init() {
	commands["compare"] = command{"two run folders side by side, judged against the suite's tolerances", cmdCompare}
	jsonResults["compare"] = compare.Result{}
}

func cmdCompare(args []string, stdout, stderr io.Writer) int {
	c := newCmdline("compare", "RUN_A RUN_B", `
Compares run B with run A (the reference, for example the firmware before a
change): writes an HTML page with both runs overlaid on shared axes (joint
angles, normal forces, friction utilization, round trip), the per-step
metrics side by side with their differences, the alarms of each, the
scenarios' differences field by field and the firmware greetings. When both
runs ran the same scenario text from the same initial state it names the
first tick where the plant trajectories part. Exit code 0 when B is within
the suite's tolerances of A (those of gaitrig suite: no fewer steps, ±5 %
mean speed, +0.05 peak friction utilization, −10 % least normal force,
+50 % p99 latency, no new alarm kind), 1 otherwise, 2 for bad usage or a
folder that cannot be read.`, stdout, stderr)
	out := c.String("html", "compare.html", "write the page to `FILE`")
	c.jsonFlag()
	if done, code := c.parse(args); done {
		return code
	}
	if c.NArg() != 2 {
		return c.usageError("want two run folders, RUN_A and RUN_B; got %d arguments", c.NArg())
	}
	res, err := compare.Runs(c.Arg(0), c.Arg(1))
	if err != nil {
		return c.fail(rig.ConfigError(err))
	}
	f, err := os.Create(*out)
	if err != nil {
		return c.fail(rig.ConfigError(err))
	}
	if err := res.WriteHTML(f); err != nil {
		f.Close()
		return c.fail(err)
	}
	if err := f.Close(); err != nil {
		return c.fail(err)
	}
	code := exitPass
	if !res.Within {
		code = exitFail
	}
	if c.jsonMode() {
		return c.printJSON(res, code)
	}
	if res.Within {
		fmt.Fprintln(stdout, "B is within the suite's tolerances of A")
	} else {
		fmt.Fprintln(stdout, "B is outside the suite's tolerances of A:")
		for _, r := range res.Regressions {
			fmt.Fprintln(stdout, "  "+r)
		}
	}
	switch {
	case !res.SameStart:
		fmt.Fprintln(stdout, "the runs do not start alike (scenario text or initial state): trajectories not compared tick by tick")
	case res.Divergence != nil:
		d := res.Divergence
		fmt.Fprintf(stdout, "trajectories part at tick %d (t = %.4f s), first in %s: A %v, B %v\n", d.Tick, d.T, d.Field, d.A, d.B)
	default:
		fmt.Fprintf(stdout, "trajectories agree bit for bit over %d ticks\n", res.ComparedTicks)
	}
	fmt.Fprintf(stdout, "%d scenario fields differ; page: %s\n", len(res.ScenarioDiffs), *out)
	fmt.Fprintln(stdout, "\n"+safetyCaution)
	return code
}

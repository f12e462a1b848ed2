package main

import (
	"context"
	"fmt"
	"io"

	"gaitrig/batch"
	"gaitrig/scenarios"
)

// printGate runs the envelope part of preflight and prints its table; it
// returns the envelope's result (nil when it could not be measured) and
// whether it says GO.
func printGate(ctx context.Context, stdout, stderr io.Writer, g batch.Gate, sc *scenarios.Scenario) (*batch.GateResult, bool) {
	fmt.Fprintf(stdout, "\nsafety envelope (margins block of %s):\n", sc.Name)
	res, err := g.Run(ctx, sc)
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig preflight: envelope:", err)
		fmt.Fprintln(stdout, "  could not be measured:", err)
		return nil, false
	}
	if len(res.Margins) == 0 {
		fmt.Fprintln(stdout, "  no margin minima set (margins.min_friction_ratio, min_push_ns, min_added_latency_ms, min_slope_deg)")
	} else {
		fmt.Fprintf(stdout, "  %-20s %10s %10s %-6s %s\n", "margin", "measured", "required", "unit", "result")
		for _, a := range res.Margins {
			verdict := "meets"
			if a.NotMeasured != "" {
				verdict = "NOT MEASURED: " + a.NotMeasured
			} else if a.Error != "" {
				verdict = "FAIL: " + a.Error
			} else if !a.Meets {
				verdict = fmt.Sprintf("FAIL: short by %.4g %s", a.Shortfall, a.Unit)
			}
			fmt.Fprintf(stdout, "  %-20s %10.4g %10.4g %-6s %s\n", a.Axis, a.Limit, a.Required, a.Unit, verdict)
		}
	}
	if st := res.Stability; st != nil {
		ok := "below"
		if !(st.RadiusHigh < res.MaxSpectralRadius) {
			ok = "NOT below"
		}
		fmt.Fprintf(stdout, "  stability: spectral radius %.3f (95 %% interval %.3f … %.3f), %s the bound %.3g; 90 %% decay in %d steps\n",
			st.SpectralRadius, st.RadiusLow, st.RadiusHigh, ok, res.MaxSpectralRadius, st.DecaySteps)
		if st.ResidualWarning != "" {
			fmt.Fprintln(stdout, "  WARNING:", st.ResidualWarning)
		}
	} else {
		fmt.Fprintln(stdout, "  stability could not be estimated:", res.StabilityError)
	}
	for _, f := range res.Failures {
		fmt.Fprintln(stdout, "  NO-GO:", f)
	}
	return &res, res.Go
}

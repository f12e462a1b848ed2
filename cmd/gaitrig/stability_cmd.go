package main

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"

	"gaitrig/batch"
	"gaitrig/history"
	"gaitrig/report"
	"gaitrig/rig"
)

func init() {
	commands["stability"] = command{"estimate the closed-loop gait's stability of any firmware from perturbed steps", cmdStability}
	jsonResults["stability"] = batch.StabilityReport{}
}

func cmdStability(args []string, stdout, stderr io.Writer) int {
	c := newCmdline("stability", "SCENARIO", `
Closed-loop stability of the firmware, treated as a black box. In lockstep
the rig perturbs the link rates (the hip velocity follows through the rolling
constraint) by small random amounts just after heel strikes, records the
states just after the following heel strikes, and fits the linearised
step-to-step map by least squares. It prints the map's eigenvalues (Floquet
multipliers) with bootstrap intervals, the spectral radius, the fit residual
(large when the firmware keeps state of its own), the steps for any
perturbation to decay by 90 %, and the gait sensitivity norm (Hobbelen and
Wisse 2007) of step time and step length for a hip push and a step-down.
For a passive walker or the built-in controller, 'gaitrig cycle' gives the
exact eigenvalues to compare with. Writes stability.html (the eigenvalues in
the complex plane against the unit circle, the figures, links to the runs),
junit.xml and stability.json into the estimate's folder. Exit code 0 when
the gait is stable (spectral radius below 1), 1 when not.`, stdout, stderr)
	link := c.String("link", "", "link to the firmware (default: the scenario's); "+rig.LinkHelp())
	out := c.String("out", "runs", "parent folder for the run folders")
	asJSON := c.jsonFlag()
	var st batch.Stability
	c.IntVar(&st.Warmup, "warmup", batch.DefaultStabilityWarmup, "steps walked before the first perturbation")
	c.IntVar(&st.Perturbed, "steps", batch.DefaultStabilityPerturbed, "perturbed steps (pairs in the fit)")
	c.Float64Var(&st.Size, "size", batch.DefaultStabilitySize, "standard deviation of each link-rate perturbation, rad/s")
	c.Int64Var(&st.Seed, "seed", 1, "seed of the perturbations and the bootstrap")
	c.Float64Var(&st.PushNs, "push", batch.DefaultGSNPushNs, "hip push of the gait sensitivity norm, N·s (negative: skip)")
	c.Float64Var(&st.StepDownM, "step-down", batch.DefaultGSNStepDownM, "floor drop of the gait sensitivity norm, m (negative: skip)")
	hist := addHistoryFlags(c)
	if done, code := c.parse(args); done {
		return code
	}
	if c.NArg() != 1 {
		return c.usageError("want exactly one SCENARIO")
	}
	if *link != "" {
		spec, err := rig.ParseLink(*link)
		if err != nil {
			fmt.Fprintln(stderr, "gaitrig stability:", err)
			return exitConfig
		}
		st.Link = spec.String()
	}
	sc, err := resolveScenario(c.Arg(0))
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig stability:", err)
		return exitCodeFor(err)
	}
	if st.Dir, err = batch.NewDir(*out, "stability"); err != nil {
		fmt.Fprintln(stderr, "gaitrig stability:", err)
		return exitConfig
	}
	ctx, stop := signalContext()
	defer stop()
	hs, err := hist.open(ctx)
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig stability:", err)
		return exitCodeFor(err)
	}
	if hs != nil {
		defer hs.Close()
	}
	rep, err := st.Run(ctx, sc)
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig stability:", err)
		return exitCodeFor(err)
	}
	var herr error
	if hs != nil {
		r := history.FromStability("stability", sc, rep, history.GreetingOf(rep.Dir), hist.rev())
		if herr = hs.Add(context.Background(), &r); herr != nil {
			fmt.Fprintln(stderr, "gaitrig stability: history:", herr)
		}
	}
	files, ferr := writeStabilityFiles(st.Dir, rep)
	if ferr != nil {
		fmt.Fprintln(stderr, "gaitrig stability:", ferr)
	}
	if *asJSON {
		enc := json.NewEncoder(stdout)
		enc.SetEscapeHTML(false)
		enc.SetIndent("", "  ")
		if err := enc.Encode(rig.JSONSafe(rep)); err != nil {
			fmt.Fprintln(stderr, "gaitrig stability:", err)
			return exitFail
		}
	} else {
		printStability(stdout, rep)
		for _, f := range files {
			fmt.Fprintln(stdout, "wrote", f)
		}
	}
	if !rep.Stable || ferr != nil {
		return exitFail
	}
	if herr != nil {
		return exitConfig // a lost history entry is not a silent pass
	}
	return exitPass
}

// writeStabilityFiles writes the estimate's page, JUnit XML and JSON into
// its folder and returns their paths.
func writeStabilityFiles(dir string, rep batch.StabilityReport) ([]string, error) {
	if err := batch.WriteStabilityPage(dir, rep); err != nil {
		return nil, err
	}
	var b bytes.Buffer
	if err := report.WriteJUnit(&b, batch.StabilitySuite(rep)); err != nil {
		return nil, err
	}
	junit := filepath.Join(dir, report.JUnitFile)
	if err := os.WriteFile(junit, b.Bytes(), 0o644); err != nil {
		return nil, err
	}
	js, err := json.MarshalIndent(rig.JSONSafe(rep), "", "  ")
	if err != nil {
		return nil, err
	}
	jsPath := filepath.Join(dir, "stability.json")
	if err := os.WriteFile(jsPath, append(js, '\n'), 0o644); err != nil {
		return nil, err
	}
	return []string{filepath.Join(dir, batch.StabilityPageFile), junit, jsPath}, nil
}

func printStability(w io.Writer, r batch.StabilityReport) {
	verdict := "stable"
	if !r.Stable {
		verdict = "UNSTABLE"
	}
	fmt.Fprintf(w, "closed-loop stability of %s: %s\n", r.Scenario, verdict)
	fmt.Fprintf(w, "  %d perturbed steps, rate perturbation %.3g rad/s (s.d.), run folder %s\n", r.Pairs, r.Size, r.Dir)
	fmt.Fprintf(w, "  spectral radius %.4f (95 %% bootstrap interval %.4f … %.4f)\n", r.SpectralRadius, r.RadiusLow, r.RadiusHigh)
	if r.DecaySteps < 0 {
		fmt.Fprintln(w, "  a perturbation does not decay by 90 % within 1000 steps")
	} else {
		fmt.Fprintf(w, "  every perturbation decays by 90 %% within %d steps\n", r.DecaySteps)
	}
	fmt.Fprintf(w, "  fit residual %.3f (relative)\n", r.Residual)
	if r.ResidualWarning != "" {
		fmt.Fprintln(w, "  WARNING:", r.ResidualWarning)
	}
	fmt.Fprintf(w, "  eigenvalues of the step-to-step map in %v:\n", r.Coordinates)
	for _, e := range r.Eigenvalues {
		fmt.Fprintf(w, "    %8.4f %+8.4fi   |λ| %.4f  (%.4f … %.4f)\n", e.Re, e.Im, e.Modulus, e.ModulusLow, e.ModulusHigh)
	}
	if len(r.GSN) > 0 {
		fmt.Fprintln(w, "  gait sensitivity norm (Hobbelen and Wisse 2007), indicators step time and step length:")
		for _, g := range r.GSN {
			if g.Error != "" {
				fmt.Fprintf(w, "    %-9s %g %s: %s\n", g.Disturbance, g.Size, g.Unit, g.Error)
				continue
			}
			fmt.Fprintf(w, "    %-9s %g %s: %.4g (step time %.4g s/%s, step length %.4g m/%s, %d steps)\n",
				g.Disturbance, g.Size, g.Unit, g.Norm, g.StepTime, g.Unit, g.StepLength, g.Unit, g.Steps)
		}
	}
	fmt.Fprintln(w)
	fmt.Fprintln(w, r.Caution)
}

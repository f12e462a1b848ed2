package main

import (
	"errors"
	"fmt"
	"io"
	"math/cmplx"

	"gaitrig/rig"
)

func init() {
	commands["cycle"] = command{"find the walker's period-one gait and its stability", cmdCycle}
	jsonResults["cycle"] = rig.GaitReport{}
}

func cmdCycle(args []string, stdout, stderr io.Writer) int {
	c := newCmdline("cycle", "SCENARIO", `
The gait finder: Newton's method on the step-to-step (Poincaré) map of the
scenario's walker finds its period-one gait, and the eigenvalues of the map's
Jacobian (variational equations with the heel-strike saltation correction)
say whether it is stable. Passive walkers are analysed as they are; with the
built-in controller the closed loop is analysed (its law is a pure function
of the measured state). Firmware authors use the result to seed a controller
with the walker's natural gait. The scenario's initial state is the guess.
A gait belongs to one slope and one friction: the walker is analysed on one
terrain segment, extended without end; by default the segment under the
initial stance foot, or the one --segment names. The output says which.
A walker with knees is analysed on the section with both knees locked
straight, the step passing through the trailing knee's release and the swing
knee's strike; its Jacobian is taken by central differences of the whole
map, and the output adds the knee strike's energy loss and impulse ratio and
the minimum stance knee-lock torque (negative: the latch must pull).
Exit code 0 when a gait is found (stable or not: the output says which), 1
when none is found from the guess, 2 for bad usage.`, stdout, stderr)
	segment := c.Int("segment", -1, "terrain segment `INDEX` to analyse on, 0-based as in terrain.segments (-1: the one under the initial stance foot)")
	c.jsonFlag()
	if done, code := c.parse(args); done {
		return code
	}
	if c.NArg() != 1 {
		return c.usageError("want exactly one SCENARIO, got %d arguments", c.NArg())
	}
	if *segment < -1 {
		return c.usageError("--segment %d: want a segment index ≥ 0 (or -1 for the one under the initial stance foot)", *segment)
	}
	sc, err := resolveScenario(c.Arg(0))
	if err != nil {
		return c.fail(err)
	}
	rep, err := rig.AnalyseGaitOn(sc, *segment)
	if errors.Is(err, rig.ErrConfig) {
		return c.fail(err)
	}
	code := exitPass
	if !rep.Found {
		code = exitFail
	}
	if c.jsonMode() {
		if err != nil {
			fmt.Fprintln(stderr, "gaitrig cycle:", err)
		}
		return c.printJSON(rep, code)
	}
	printCycle(stdout, rep, err)
	// "stable" is a verdict a person acts on: it carries the caution.
	fmt.Fprintln(stdout, "\n"+safetyCaution)
	return code
}

func printCycle(w io.Writer, r rig.GaitReport, err error) {
	fmt.Fprintf(w, "gait of %s (%s)\n", r.Scenario, r.Loop)
	s := r.Segment
	how := "the segment under the initial stance foot"
	if s.Chosen {
		how = "chosen with --segment"
	}
	fmt.Fprintf(w, "  on terrain segment %d (of %d, counted from 0; %s): slope %.4g rad, mu_static %.3g, mu_kinetic %.3g, taken as ground without end\n",
		s.Index, s.Of, how, s.SlopeRad, s.MuStatic, s.MuKinetic)
	if !r.Found {
		fmt.Fprintf(w, "  no period-one gait found from the scenario's guess (%v)\n", err)
		return
	}
	verdict := "stable"
	if !r.Stable {
		verdict = "UNSTABLE"
	}
	fmt.Fprintf(w, "  found after %d Newton iterations, residual %.1e; %s (spectral radius %.4f)\n", r.Iterations, r.Residual, verdict, r.SpectralRadius)
	fmt.Fprintf(w, "  period %.4f s, step length %.4f m, speed %.4f m/s\n", r.PeriodS, r.StepLengthM, r.SpeedMPS)
	fmt.Fprintf(w, "  energy lost at heel strike %.4f J per step, impulse ratio |Λt|/Λn %.4f\n", r.EnergyLostPerStepJ, r.ImpulseRatio)
	fmt.Fprintf(w, "  peak required friction coefficient %.4f, minimum normal force %.2f N\n", r.PeakRequiredFriction, r.MinNormalForceN)
	if r.Knees {
		fmt.Fprintf(w, "  energy lost at knee strike %.4f J per step, impulse ratio |Λt|/Λn %.4f; minimum stance knee-lock torque %.3f N·m (negative: the latch pulls)\n",
			r.KneeStrikeEnergyLostJ, r.KneeStrikeImpulseRatio, r.MinStanceKneeTorqueNM)
	}
	fmt.Fprintln(w, "  eigenvalues of the step-to-step map:")
	for _, e := range r.Eigenvalues {
		fmt.Fprintf(w, "    % .8f %+.8fi   |λ| = %.6f\n", e[0], e[1], cmplx.Abs(complex(e[0], e[1])))
	}
	fmt.Fprintf(w, "  state after heel strike (stance %s): reduced %v\n", r.State.Stance, fmtSlice(r.State.Reduced))
	fmt.Fprintf(w, "    q %v\n    v %v\n", fmtSlice(r.State.Q), fmtSlice(r.State.V))
	fmt.Fprintf(w, "  convention: %s\n", r.State.Convention)
}

func fmtSlice(v []float64) string {
	s := "["
	for i, x := range v {
		if i > 0 {
			s += " "
		}
		s += fmt.Sprintf("%.8g", x)
	}
	return s + "]"
}

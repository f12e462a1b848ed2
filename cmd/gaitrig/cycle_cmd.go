package main

import (
	"encoding/json"
	"fmt"
	"io"
	"math/cmplx"

	"gaitrig/plant"
	"gaitrig/rig"
)

func init() {
	commands["cycle"] = command{"find the walker's period-one gait and its stability", cmdCycle}
}

// cycleReport is the JSON form of a found gait.
type cycleReport struct {
	Scenario             string       `json:"scenario"`
	Loop                 string       `json:"loop"` // passive or closed loop with the built-in controller
	Found                bool         `json:"found"`
	Stable               bool         `json:"stable"`
	Eigenvalues          [][2]float64 `json:"eigenvalues"`
	SpectralRadius       float64      `json:"spectral_radius"`
	PeriodS              float64      `json:"period_s"`
	StepLengthM          float64      `json:"step_length_m"`
	SpeedMPS             float64      `json:"speed_mps"`
	EnergyLostPerStepJ   float64      `json:"energy_lost_per_step_j"`
	PeakRequiredFriction float64      `json:"peak_required_friction"`
	MinNormalForceN      float64      `json:"min_normal_force_n"`
	ImpulseRatio         float64      `json:"impulse_ratio"`
	Residual             float64      `json:"residual"`
	Iterations           int          `json:"iterations"`
	State                cycleState   `json:"state_after_heel_strike"`
}

// cycleState is the gait's state just after heel strike, with its convention.
type cycleState struct {
	Convention string    `json:"convention"`
	Stance     string    `json:"stance"`
	Q          []float64 `json:"q"`
	V          []float64 `json:"v"`
	Reduced    []float64 `json:"reduced"`
}

const stateConvention = "just after heel strike, the new stance foot rolling; q = (x_hip m, y_hip m, θ_left, θ_right[, θ_torso]) " +
	"absolute angles in rad counter-clockwise from the world vertical (a leg with θ > 0 has its foot ahead of the hip; " +
	"torso forward lean is θ < 0), v = dq/dt; reduced = (θ_stance, θ_swing[, θ_torso], their rates)"

func cmdCycle(args []string, stdout, stderr io.Writer) int {
	fs := newFlagSet("cycle", "SCENARIO", `
The gait finder: Newton's method on the step-to-step (Poincaré) map of the
scenario's walker finds its period-one gait, and the eigenvalues of the map's
Jacobian (variational equations with the heel-strike saltation correction)
say whether it is stable. Passive walkers are analysed as they are; with the
built-in controller the closed loop is analysed (its law is a pure function
of the measured state). Firmware authors use the result to seed a controller
with the walker's natural gait. The scenario's initial state is the guess.
Exit code 0 when a gait is found (stable or not: the output says which), 1
when none is found from the guess.`, stderr)
	asJSON := fs.Bool("json", false, "print JSON instead of a table")
	if done, code := parseFlags(fs, args); done {
		return code
	}
	if fs.NArg() != 1 {
		fmt.Fprintln(stderr, "gaitrig cycle: want exactly one SCENARIO")
		fs.Usage()
		return exitConfig
	}
	sc, err := resolveScenario(fs.Arg(0))
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig cycle:", err)
		return exitCodeFor(err)
	}
	cfg, err := rig.FromScenario(sc)
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig cycle:", err)
		return exitConfig
	}
	model, err := rig.NewModel(sc, cfg)
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig cycle:", err)
		return exitConfig
	}
	policy, _, err := rig.GaitPolicy(sc, model)
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig cycle:", err)
		return exitCodeFor(err)
	}
	g, err := rig.FindGait(sc, model)
	if err != nil && !g.Found {
		if exitCodeFor(err) == exitConfig {
			fmt.Fprintln(stderr, "gaitrig cycle:", err)
			return exitConfig
		}
	}
	rep := cycleReport{Scenario: sc.Name, Loop: "passive", Found: g.Found && err == nil, Stable: g.Stable,
		PeriodS: g.Period, StepLengthM: g.StepLength, SpeedMPS: g.Speed, EnergyLostPerStepJ: g.EnergyLost,
		PeakRequiredFriction: g.PeakRequiredFriction, MinNormalForceN: g.MinNormal, ImpulseRatio: g.ImpulseRatio,
		Residual: g.Residual, Iterations: g.Iterations, Eigenvalues: [][2]float64{}}
	if policy != nil {
		rep.Loop = "closed loop with the built-in reference controller"
	}
	for _, e := range g.Eigenvalues {
		rep.Eigenvalues = append(rep.Eigenvalues, [2]float64{real(e), imag(e)})
		rep.SpectralRadius = max(rep.SpectralRadius, cmplx.Abs(e))
	}
	rep.State = stateOf(model, g.State)
	if *asJSON {
		enc := json.NewEncoder(stdout)
		enc.SetIndent("", "  ")
		if err := enc.Encode(rig.JSONSafe(rep)); err != nil {
			fmt.Fprintln(stderr, "gaitrig cycle:", err)
			return exitFail
		}
	} else {
		printCycle(stdout, rep, err)
	}
	if !rep.Found {
		if err != nil && !*asJSON {
			fmt.Fprintln(stderr, "gaitrig cycle:", err)
		}
		return exitFail
	}
	return exitPass
}

func stateOf(m *plant.Model, s plant.State) cycleState {
	n := m.NumDOF()
	st := "left"
	if s.Stance == 1 {
		st = "right"
	}
	return cycleState{Convention: stateConvention, Stance: st,
		Q: append([]float64(nil), s.Q[:n]...), V: append([]float64(nil), s.V[:n]...), Reduced: m.Reduced(&s)}
}

func printCycle(w io.Writer, r cycleReport, err error) {
	fmt.Fprintf(w, "gait of %s (%s)\n", r.Scenario, r.Loop)
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

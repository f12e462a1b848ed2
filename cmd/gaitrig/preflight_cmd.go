package main

import (
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"time"

	"gaitrig/record"
	"gaitrig/report"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

func init() {
	commands["preflight"] = command{"pre-trial go/no-go battery against the connected firmware", cmdPreflight}
}

// preflightSlope is the slope of the uphill and downhill checks: 2°, a
// gentle ramp such as a treadmill incline (our choice).
const preflightSlope = 2 * math.Pi / 180

// preflightPush is the forward hip push as a change of the walker's
// momentum: 0.15 m/s times its total mass, delivered over one tick at the
// fifth heel strike (our choice: a firm nudge, not a shove).
const preflightPushSpeed = 0.15

// Minimum sensor noise the "tripled noise" check starts from when the base
// scenario has none: a 12-bit encoder's quantization step (2π/4096 ≈ 1.5e-3
// rad) and a rate noise of 0.01 rad/s, typical of encoder differencing at
// 1 kHz (common practice).
const (
	typicalAngleNoise = 1.5e-3
	typicalRateNoise  = 0.01
)

// preflightCase is one check of the battery: a name, what it does, and how
// it changes the base scenario.
type preflightCase struct {
	Name   string
	What   string
	Mutate func(*scenarios.Scenario)
}

// preflightBattery is the fixed battery. It is fixed on purpose: a go/no-go
// gate must mean the same thing every time it is run.
func preflightBattery() []preflightCase {
	return []preflightCase{
		{"nominal", "the scenario as written", func(*scenarios.Scenario) {}},
		{"half-friction", "μ_s and μ_k of every terrain segment halved", func(s *scenarios.Scenario) {
			for i := range s.Terrain.Segments {
				s.Terrain.Segments[i].MuStatic *= 0.5
				s.Terrain.Segments[i].MuKinetic *= 0.5
			}
		}},
		{"uphill", "every segment tilted 2° up", func(s *scenarios.Scenario) { tilt(s, preflightSlope) }},
		{"downhill", "every segment tilted 2° down", func(s *scenarios.Scenario) { tilt(s, -preflightSlope) }},
		{"push", "a forward hip push of 0.15 m/s × total mass at the 5th heel strike", func(s *scenarios.Scenario) {
			m := s.Plant.HipMassKG + s.Leg(0).MassKG + s.Leg(1).MassKG
			if s.Plant.Torso != nil {
				m += s.Plant.Torso.MassKG
			}
			s.Faults = append(s.Faults, scenarios.Fault{Kind: scenarios.FaultPush, AtStep: 5, ImpulseNS: []float64{preflightPushSpeed * m, 0}})
		}},
		{"latency", "5 ms added command latency plus up to 2 ms jitter", func(s *scenarios.Scenario) {
			s.Faults = append(s.Faults, scenarios.Fault{Kind: scenarios.FaultLatency, FixedMS: 5, JitterMS: 2})
		}},
		{"sensor-noise", "sensor noise tripled (from typical values when the scenario has none)", func(s *scenarios.Scenario) {
			n := &s.Sensors
			n.AngleNoiseRad = 3 * math.Max(n.AngleNoiseRad, typicalAngleNoise)
			n.RateNoiseRadps = 3 * math.Max(n.RateNoiseRadps, typicalRateNoise)
			n.IMUPitchNoiseRad = 3 * math.Max(n.IMUPitchNoiseRad, typicalAngleNoise)
			n.IMURateNoiseRadps = 3 * math.Max(n.IMURateNoiseRadps, typicalRateNoise)
		}},
	}
}

func tilt(s *scenarios.Scenario, by float64) {
	for i := range s.Terrain.Segments {
		s.Terrain.Segments[i].SlopeRad += by
	}
}

func cmdPreflight(args []string, stdout, stderr io.Writer) int {
	fs := newFlagSet("preflight", "", `
The pre-trial go/no-go check. Runs a fixed battery against the connected
firmware: nominal; half the friction; uphill and downhill (2°); a forward push;
added command latency; tripled sensor noise. Each check must pass the
scenario's own criteria (default scenario: the level-ground demo). Prints a
table of margins (friction utilization, normal-force margin, steps, latency)
and GO only when every check passed; exit code 0 for GO, 1 for NO-GO.`, stderr)
	link := fs.String("link", "builtin", rig.LinkHelp())
	scenario := fs.String("scenario", "level-demo", "base scenario (file or built-in name)")
	out := fs.String("out", "runs", "parent folder for the run folders")
	if done, code := parseFlags(fs, args); done {
		return code
	}
	spec, err := rig.ParseLink(*link)
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig preflight:", err)
		return exitConfig
	}
	base, err := resolveScenario(*scenario)
	if err != nil {
		fmt.Fprintln(stderr, "gaitrig preflight:", err)
		return exitCodeFor(err)
	}
	battery := preflightBattery()
	items := make([]*suiteItem, 0, len(battery))
	for _, c := range battery {
		v, err := variantOf(base, base.Name+"-"+c.Name, c.Mutate)
		if err != nil {
			fmt.Fprintln(stderr, "gaitrig preflight:", err)
			return exitConfig
		}
		items = append(items, &suiteItem{Source: c.Name, Scenario: v})
	}
	dir := filepath.Join(*out, "preflight-"+time.Now().UTC().Format("20060102-150405"))
	if err := os.MkdirAll(dir, 0o755); err != nil {
		fmt.Fprintln(stderr, "gaitrig preflight:", err)
		return exitConfig
	}
	fmt.Fprintf(stdout, "preflight of %s on link %s: %d checks, run folders in %s\n\n", base.Name, spec, len(items), dir)
	ctx, stop := signalContext()
	defer stop()
	parallel := 1
	if spec.InProcess() {
		parallel = runtime.NumCPU()
	}
	runSuite(ctx, items, dir, spec.String(), true, parallel, stdout)

	fmt.Fprintf(stdout, "\n%-14s %-8s %5s %12s %10s %12s %12s  %s\n", "check", "outcome", "steps", "friction use", "margin", "min normal", "latency p99", "what")
	go_ := true
	var results []report.ScenarioResult
	for i, it := range items {
		c := battery[i]
		r := report.ScenarioResult{Scenario: it.Scenario.Name, Seconds: it.Seconds, Err: it.Err}
		if it.Err != nil {
			go_ = false
			fmt.Fprintf(stdout, "%-14s %-8s could not run: %v\n", c.Name, "ERROR", it.Err)
			results = append(results, r)
			continue
		}
		s := it.Result.Summary
		r.Outcome = string(s.Outcome)
		if s.Outcome != record.Pass {
			go_ = false
			reason := s.Reason
			for _, cr := range s.Criteria {
				if !cr.Pass {
					reason += fmt.Sprintf("; %s %s (limit %s)", cr.Name, fmtNum(cr.Value), fmtNum(cr.Limit))
				}
			}
			r.Regressions = []string{fmt.Sprintf("outcome %s%s", s.Outcome, reasonSuffix(reason))}
		}
		lat := "-"
		if s.LatencyUS != nil && !math.IsNaN(s.LatencyUS.P99) {
			lat = fmt.Sprintf("%.0f µs", s.LatencyUS.P99)
		}
		fmt.Fprintf(stdout, "%-14s %-8s %5d %12s %10s %10s N %12s  %s\n", c.Name, s.Outcome, s.Steps,
			fmt.Sprintf("%.0f%%", 100*s.PeakFrictionUtilization), fmt.Sprintf("%.0f%%", 100*(1-s.PeakFrictionUtilization)),
			fmtNum(s.MinNormalForceN), lat, c.What)
		results = append(results, r)
	}
	if err := writeJUnitFile(filepath.Join(dir, report.JUnitFile), "gaitrig preflight", results); err != nil {
		fmt.Fprintln(stderr, "gaitrig preflight:", err)
	}
	for _, r := range results {
		for _, g := range r.Regressions {
			fmt.Fprintf(stdout, "  %s: %s\n", r.Scenario, g)
		}
	}
	verdict := "GO"
	if !go_ {
		verdict = "NO-GO"
	}
	fmt.Fprintf(stdout, "\nverdict: %s\n", verdict)
	if go_ {
		fmt.Fprintln(stdout, "Every check passed in simulation. This clears the firmware for the next step of the lab's own procedure, nothing more.")
	} else {
		fmt.Fprintln(stdout, "At least one check failed: do not proceed to a trial with this firmware build.")
	}
	fmt.Fprintln(stdout, "\n"+safetyCaution)
	if !go_ {
		return exitFail
	}
	return exitPass
}

func reasonSuffix(r string) string {
	if r == "" {
		return ""
	}
	return " (" + r + ")"
}

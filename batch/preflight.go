package batch

import (
	"context"
	"fmt"
	"math"
	"path/filepath"

	"gaitrig/record"
	"gaitrig/report"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// PreflightSlope is the slope of the uphill and downhill checks: 2°, a
// gentle ramp such as a treadmill incline (our choice).
const PreflightSlope = 2 * math.Pi / 180

// PreflightPushSpeed is the forward hip push of the push check as a change
// of the walker's speed, m/s: the impulse is 0.15 m/s times the walker's
// total mass, delivered over one tick at the fifth heel strike (our
// choice: a firm nudge, not a shove).
const PreflightPushSpeed = 0.15

// Sensor noise the "tripled noise" check starts from when the base
// scenario has none: a 12-bit encoder's quantization step (2π/4096 ≈
// 1.5e-3 rad) and a rate noise of 0.01 rad/s, typical of encoder
// differencing at 1 kHz (common practice).
const (
	TypicalAngleNoiseRad  = 1.5e-3
	TypicalRateNoiseRadps = 0.01
)

// Check is one check of a battery: a name (part of the variant's name and
// run folder), what it does in words (printed, and recorded in the
// variant's text), and the change it makes to the base scenario (nil for
// none).
type Check struct {
	// Name is short and plain (letters, digits, '-'): the variant is
	// named BASE-NAME.
	Name string
	// What says the change in words.
	What string
	// Change edits the variant (a deep copy of the base); nil for none.
	Change func(*scenarios.Scenario)
}

// Battery is the preflight battery: nominal, half friction, 2° up and
// down, one forward push, added command latency, tripled sensor noise. It
// is fixed on purpose: a go/no-go gate must mean the same thing every time
// it is run.
func Battery() []Check {
	return []Check{
		{"nominal", "the scenario as written", nil},
		{"half-friction", "μ_s and μ_k of every terrain segment halved", func(s *scenarios.Scenario) {
			for i := range s.Terrain.Segments {
				s.Terrain.Segments[i].MuStatic *= 0.5
				s.Terrain.Segments[i].MuKinetic *= 0.5
			}
		}},
		{"uphill", "every segment tilted 2° up", func(s *scenarios.Scenario) { tilt(s, PreflightSlope) }},
		{"downhill", "every segment tilted 2° down", func(s *scenarios.Scenario) { tilt(s, -PreflightSlope) }},
		{"push", "a forward hip push of 0.15 m/s × total mass at the 5th heel strike", func(s *scenarios.Scenario) {
			m := s.Plant.HipMassKG + s.Leg(0).MassKG + s.Leg(1).MassKG
			if s.Plant.Torso != nil {
				m += s.Plant.Torso.MassKG
			}
			s.Faults = append(s.Faults, scenarios.Fault{Kind: scenarios.FaultPush, AtStep: 5, ImpulseNS: []float64{PreflightPushSpeed * m, 0}})
		}},
		{"latency", "5 ms added command latency plus up to 2 ms jitter", func(s *scenarios.Scenario) {
			s.Faults = append(s.Faults, scenarios.Fault{Kind: scenarios.FaultLatency, FixedMS: 5, JitterMS: 2})
		}},
		{"sensor-noise", "sensor noise tripled (from typical values when the scenario has none)", func(s *scenarios.Scenario) {
			n := &s.Sensors
			n.AngleNoiseRad = 3 * math.Max(n.AngleNoiseRad, TypicalAngleNoiseRad)
			n.RateNoiseRadps = 3 * math.Max(n.RateNoiseRadps, TypicalRateNoiseRadps)
			n.IMUPitchNoiseRad = 3 * math.Max(n.IMUPitchNoiseRad, TypicalAngleNoiseRad)
			n.IMURateNoiseRadps = 3 * math.Max(n.IMURateNoiseRadps, TypicalRateNoiseRadps)
		}},
	}
}

func tilt(s *scenarios.Scenario, by float64) {
	for i := range s.Terrain.Segments {
		s.Terrain.Segments[i].SlopeRad += by
	}
}

// Preflight runs a battery of variants of one scenario and says GO only
// when every check passes the scenario's own criteria. Set Dir; the other
// settings have working defaults.
type Preflight struct {
	// Dir is the folder the run folders go in, one per check, named after
	// the variant. Required.
	Dir string
	// Link is the link every check runs against, in --link syntax; ""
	// keeps the scenario's.
	Link string
	// Checks is the battery. Default Battery().
	Checks []Check
	// Jobs is how many checks run at once (see Scheduler). Default 1.
	Jobs int
	// Runner runs one check. Default rig.Run.
	Runner RunFunc
	// OnDone is called once per check as it finishes, in battery order
	// (with Seeds, once per check when its last seed is done, with the
	// worst seed's run). Default none.
	OnDone func(i int, d Done)
	// Seeds, when above 1, runs every check with that many seeds of
	// sensor noise, drops and latency (SeedVariants); a check passes
	// only when every seed passes. Default 1: the scenario's own seed.
	Seeds int
}

func (p Preflight) checks() []Check {
	if p.Checks == nil {
		return Battery()
	}
	return p.Checks
}

// Variants derives one variant of base per check, named BASE-CHECK, in
// battery order. An error (a variant the loader refuses) wraps
// rig.ErrConfig.
func (p Preflight) Variants(base *scenarios.Scenario) ([]*scenarios.Scenario, error) {
	var out []*scenarios.Scenario
	for _, c := range p.checks() {
		v, err := Derive(base, base.Name+"-"+c.Name, c.What, c.Change)
		if err != nil {
			return nil, rig.ConfigError(err)
		}
		out = append(out, v)
	}
	return out, nil
}

// CheckResult is one check of a preflight and what became of it.
type CheckResult struct {
	// Check is the check.
	Check Check
	// Done is its run (Done.Job.Scenario is the variant).
	Done
	// Pass is true when the run was carried out and passed the scenario's
	// criteria.
	Pass bool
	// Problems says, in words, why a check that ran did not pass: the
	// outcome, its reason and each failed criterion with value and limit.
	Problems []string
	// Seeds is the check over Preflight.Seeds seeds (nil with one seed):
	// its pass rate with the Wilson interval and the worst run, which is
	// the run in Done.
	Seeds *SeedsResult
}

// PreflightResult is the verdict of a preflight.
type PreflightResult struct {
	// Checks holds every check in battery order.
	Checks []CheckResult
	// Go is true when every check ran and passed.
	Go bool
	// Results holds one JUnit test case per check, in battery order.
	Results []report.ScenarioResult
}

// Run runs the variants (from Variants, in battery order) and judges them.
func (p Preflight) Run(ctx context.Context, variants []*scenarios.Scenario) (PreflightResult, error) {
	checks := p.checks()
	if len(variants) != len(checks) {
		return PreflightResult{}, fmt.Errorf("preflight: %d variants for %d checks", len(variants), len(checks))
	}
	n := max(p.Seeds, 1)
	seeded := make([][]*scenarios.Scenario, len(variants))
	var jobs []Job
	for i, v := range variants {
		seeded[i] = []*scenarios.Scenario{v}
		if n > 1 {
			vs, err := SeedVariants(v, n)
			if err != nil {
				return PreflightResult{}, rig.ConfigError(err)
			}
			seeded[i] = vs
		}
		for _, s := range seeded[i] {
			jobs = append(jobs, Job{Scenario: s, Options: rig.Options{Link: p.Link, RunDir: filepath.Join(p.Dir, s.Name), Report: true}})
		}
	}
	// A check is one run, or its worst seed's: OnDone reports a check
	// when its last seed is done (the scheduler calls in job order).
	var onDone func(int, Done)
	if p.OnDone != nil {
		runs := make([]Done, 0, n)
		onDone = func(j int, d Done) {
			runs = append(runs, d)
			if len(runs) == n {
				i := j / n
				p.OnDone(i, runs[seedsResult(variants[i].Name, seeded[i], runs).Worst])
				runs = runs[:0]
			}
		}
	}
	all := Scheduler{Jobs: p.Jobs, Runner: p.Runner, OnDone: onDone}.RunAll(ctx, jobs)
	runs := make([]Done, len(variants))
	var seeds []*SeedsResult
	for i := range variants {
		ds := all[i*n : (i+1)*n]
		sr := seedsResult(variants[i].Name, seeded[i], ds)
		runs[i] = ds[sr.Worst]
		if n > 1 {
			seeds = append(seeds, &sr)
		}
	}
	out := PreflightResult{Go: true}
	for i, d := range runs {
		c := CheckResult{Check: checks[i], Done: d}
		r := report.ScenarioResult{Scenario: d.Job.Scenario.Name, Seconds: d.Seconds, Err: d.Err}
		if d.Err == nil {
			s := d.Result.Summary
			r.Outcome = string(s.Outcome)
			c.Pass = s.Outcome == record.Pass
			if !c.Pass {
				c.Problems = []string{"outcome " + string(s.Outcome) + reasonSuffix(failureReason(s))}
			}
		}
		if seeds != nil {
			sr := seeds[i]
			c.Seeds = sr
			r.Scenario = variants[i].Name // the check, not its worst seed
			// The worst run is a failure when any seed failed; a seed the
			// host spoiled was not tested, so it is no pass either.
			if sr.Invalid > 0 && c.Pass {
				c.Pass = false
				c.Problems = append(c.Problems, fmt.Sprintf("%d of %d seeds ran invalid (the host stalled them): not tested; run again on a quieter host", sr.Invalid, len(sr.Runs)))
			}
			if !c.Pass {
				c.Problems = append(c.Problems, fmt.Sprintf("%d of %d seeds passed (pass rate %.3f, 95 %% Wilson interval %.3f … %.3f); worst run seed %d: %s",
					sr.Passed, sr.N, sr.Rate, sr.Low, sr.High, sr.Runs[sr.Worst].Seed, sr.Runs[sr.Worst].Dir))
			}
		}
		if !c.Pass {
			r.Regressions = c.Problems
		}
		if !c.Pass {
			out.Go = false
		}
		out.Checks = append(out.Checks, c)
		out.Results = append(out.Results, r)
	}
	return out, nil
}

// failureReason is the summary's reason followed by every failed criterion
// with its value and limit.
func failureReason(s record.Summary) string {
	reason := s.Reason
	for _, cr := range s.Criteria {
		if !cr.Pass {
			reason += fmt.Sprintf("; %s %s (limit %s)", cr.Name, report.FormatNumber(cr.Value), report.FormatNumber(cr.Limit))
		}
	}
	return reason
}

func reasonSuffix(r string) string {
	if r == "" {
		return ""
	}
	return " (" + r + ")"
}

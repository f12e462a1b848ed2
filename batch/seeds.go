package batch

// This file owns runs over many seeds (--seeds N): the same scenario with
// N seeds of sensor noise, drops and latency, its pass rate with a Wilson
// score interval (Wilson 1927, JASA 22:209), and the worst run.

import (
	"context"
	"fmt"
	"math"
	"path/filepath"

	"gaitrig/record"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// WilsonZ95 is the standard normal quantile of a two-sided 95 % interval,
// Φ⁻¹(0.975) (handbook value).
const WilsonZ95 = 1.959963984540054

// Wilson returns the Wilson score interval of a proportion with k
// successes in n trials at normal quantile z (Wilson 1927): the p for which
// |k/n − p| ≤ z √(p(1−p)/n). Unlike the normal approximation it stays in
// [0, 1] and is not empty at k = 0 or k = n. n = 0 gives [0, 1].
func Wilson(k, n int, z float64) (lo, hi float64) {
	if n <= 0 {
		return 0, 1
	}
	nf := float64(n)
	p := float64(k) / nf
	z2 := z * z
	centre := (p + z2/(2*nf)) / (1 + z2/nf)
	half := z / (1 + z2/nf) * math.Sqrt(p*(1-p)/nf+z2/(4*nf*nf))
	return math.Max(0, centre-half), math.Min(1, centre+half)
}

// SeedRun is one seed's run.
type SeedRun struct {
	Seed    int64          `json:"seed"`             // the variant's sensors.seed
	Outcome record.Outcome `json:"outcome"`          // the run's outcome (aborted when it could not run)
	Reason  string         `json:"reason,omitempty"` // why the run ended so; empty for a plain pass
	Steps   int            `json:"steps"`            // heel strikes completed; 0 when it could not run
	// PeakUtilization is the run's peak friction utilization, the tie
	// breaker for the worst run among passes.
	PeakUtilization float64 `json:"peak_friction_utilization"`
	Dir             string  `json:"run_dir"` // the run folder
}

// SeedsResult is the pass rate over seeds.
type SeedsResult struct {
	Scenario string    `json:"scenario"` // name of the scenario the seeds vary
	Runs     []SeedRun `json:"runs"`     // one per seed, in the order of the seed variants
	Passed   int       `json:"passed"`   // runs that passed
	// N is the number of runs the rate is over: every seed but those
	// whose run the host spoiled (outcome invalid), which say nothing
	// about the firmware.
	N int `json:"n"`
	// Invalid is how many runs ended with outcome invalid (run again on
	// a quieter host); they are neither passes nor failures.
	Invalid int     `json:"invalid"`
	Rate    float64 `json:"pass_rate"` // Passed / N; NaN when N is 0
	// Low and High bound the 95 % Wilson score interval of the pass rate.
	Low  float64 `json:"pass_rate_low"`
	High float64 `json:"pass_rate_high"` // upper end of the 95 % Wilson interval (1 when N is 0)
	// Worst is the index in Runs of the worst run: a failure with the
	// fewest steps, else the pass with the highest friction utilization.
	Worst   int    `json:"worst"`
	Caution string `json:"caution"` // record.Caution: a pass is not a safety certificate
}

// SeedVariants derives n variants of sc with sensors.seed = sc's seed + i
// (the seed of the sensor noise and the random link faults alike).
func SeedVariants(sc *scenarios.Scenario, n int) ([]*scenarios.Scenario, error) {
	if n < 1 {
		return nil, rig.Configf("seeds: want at least 1, got %d", n)
	}
	out := make([]*scenarios.Scenario, n)
	for i := range out {
		seed := sc.Sensors.Seed + int64(i)
		v, err := Derive(sc, fmt.Sprintf("%s-seed%d", sc.Name, seed), fmt.Sprintf("sensors.seed %d (run %d of %d seeds)", seed, i+1, n), func(s *scenarios.Scenario) {
			s.Sensors.Seed = seed
		})
		if err != nil {
			return nil, err
		}
		out[i] = v
	}
	return out, nil
}

// RunSeeds runs sc with n seeds on the scheduler s (its Jobs and Runner;
// Options are every run's rig options, with RunDir set per seed under
// dir).
func RunSeeds(ctx context.Context, s Scheduler, sc *scenarios.Scenario, n int, o rig.Options, dir string) (SeedsResult, error) {
	vs, err := SeedVariants(sc, n)
	if err != nil {
		return SeedsResult{}, err
	}
	jobs := make([]Job, n)
	for i, v := range vs {
		oi := o
		oi.RunDir = filepath.Join(dir, v.Name)
		jobs[i] = Job{Scenario: v, Options: oi}
	}
	return seedsResult(sc.Name, vs, s.RunAll(ctx, jobs)), nil
}

// seedsResult is the pass rate of the runs done of the seed variants vs
// (in the same order) of the scenario named name.
func seedsResult(name string, vs []*scenarios.Scenario, done []Done) SeedsResult {
	res := SeedsResult{Scenario: name, Caution: record.Caution}
	for i, d := range done {
		r := SeedRun{Seed: vs[i].Sensors.Seed, Dir: d.Result.Dir}
		if d.Err != nil {
			r.Outcome, r.Reason = record.Aborted, d.Err.Error()
		} else {
			r.Outcome, r.Reason, r.Steps = d.Result.Summary.Outcome, d.Result.Summary.Reason, d.Result.Summary.Steps
			r.PeakUtilization = d.Result.Summary.PeakFrictionUtilization
		}
		switch r.Outcome {
		case record.Pass:
			res.Passed++
		case record.Invalid:
			res.Invalid++
		}
		res.Runs = append(res.Runs, r)
	}
	res.N = len(done) - res.Invalid
	res.Rate = math.NaN()
	if res.N > 0 {
		res.Rate = float64(res.Passed) / float64(res.N)
	}
	res.Low, res.High = Wilson(res.Passed, res.N, WilsonZ95)
	res.Worst = worstRun(res.Runs)
	return res
}

// worstRun picks the failure with the fewest steps, else the pass with the
// highest peak friction utilization; the first on ties.
func worstRun(runs []SeedRun) int {
	worst := 0
	key := func(r SeedRun) (bool, float64) {
		if r.Outcome == record.Invalid {
			return false, math.Inf(-1) // says nothing about the firmware
		}
		if r.Outcome != record.Pass {
			return true, -float64(r.Steps)
		}
		return false, r.PeakUtilization
	}
	for i := 1; i < len(runs); i++ {
		fi, ki := key(runs[i])
		fw, kw := key(runs[worst])
		if (fi && !fw) || (fi == fw && ki > kw) {
			worst = i
		}
	}
	return worst
}

package batch

import (
	"context"
	"math"
	"testing"

	"gaitrig/record"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// TestWilsonAgainstPublishedIntervals compares with the score-method
// intervals of Newcombe (1998), Statistics in Medicine 17:857-872, Table I
// (from memory, four decimals), and checks that each end solves Wilson's
// quadratic n (k/n − p)² = z² p (1 − p), the definition, by substitution.
func TestWilsonAgainstPublishedIntervals(t *testing.T) {
	for _, tc := range []struct {
		k, n   int
		lo, hi float64
	}{
		{81, 263, 0.2553, 0.3662},
		{15, 148, 0.0624, 0.1605},
		{0, 20, 0, 0.1611},
		{1, 29, 0.0061, 0.1718},
	} {
		lo, hi := Wilson(tc.k, tc.n, WilsonZ95)
		if math.Abs(lo-tc.lo) > 6e-5 || math.Abs(hi-tc.hi) > 6e-5 {
			t.Errorf("%d/%d: [%.4f, %.4f], published [%.4f, %.4f]", tc.k, tc.n, lo, hi, tc.lo, tc.hi)
		}
		ph := float64(tc.k) / float64(tc.n)
		for _, p := range []float64{lo, hi} {
			if p == 0 && tc.k == 0 {
				continue // the clamp at 0 is the root p = 0 itself
			}
			lhs := float64(tc.n) * (ph - p) * (ph - p)
			rhs := WilsonZ95 * WilsonZ95 * p * (1 - p)
			if math.Abs(lhs-rhs) > 1e-12 {
				t.Errorf("%d/%d: end %g does not solve the quadratic (%g vs %g)", tc.k, tc.n, p, lhs, rhs)
			}
		}
	}
	if lo, hi := Wilson(0, 0, WilsonZ95); lo != 0 || hi != 1 {
		t.Errorf("no trials: [%g, %g]", lo, hi)
	}
}

// TestRunSeedsCountsTheRunFolders runs the demo with sensor noise over
// three seeds and recomputes the pass count and the worst run from the run
// folders' summaries.
func TestRunSeedsCountsTheRunFolders(t *testing.T) {
	if testing.Short() {
		t.Skip("lockstep walks")
	}
	base, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	sc, err := Derive(base, "noisy-demo", "sensor noise 20 × typical", func(s *scenarios.Scenario) {
		s.Sensors.AngleNoiseRad = 20 * TypicalAngleNoiseRad
		s.Sensors.RateNoiseRadps = 20 * TypicalRateNoiseRadps
	})
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	res, err := RunSeeds(context.Background(), Scheduler{Jobs: 2}, sc, 3, rig.Options{}, dir)
	if err != nil {
		t.Fatal(err)
	}
	passed := 0
	seeds := map[int64]bool{}
	for _, r := range res.Runs {
		run, err := record.Open(r.Dir)
		if err != nil {
			t.Fatal(err)
		}
		if run.Summary.Outcome == record.Pass {
			passed++
		}
		if run.Summary.Steps != r.Steps {
			t.Errorf("%s: %d steps in the folder, %d reported", r.Dir, run.Summary.Steps, r.Steps)
		}
		seeds[r.Seed] = true
	}
	if len(seeds) != 3 || passed != res.Passed || res.N != 3 {
		t.Errorf("seeds %v, passed %d (folders %d), n %d", seeds, res.Passed, passed, res.N)
	}
	lo, hi := Wilson(passed, 3, WilsonZ95)
	if res.Low != lo || res.High != hi || !(res.Low <= res.Rate && res.Rate <= res.High) {
		t.Errorf("interval [%g, %g] around %g", res.Low, res.High, res.Rate)
	}
	t.Logf("%+v", res)
}

func TestWorstRun(t *testing.T) {
	runs := []SeedRun{
		{Outcome: record.Pass, PeakUtilization: 0.7},
		{Outcome: record.Fail, Steps: 20},
		{Outcome: record.Pass, PeakUtilization: 0.9},
		{Outcome: record.Tripped, Steps: 3},
		{Outcome: record.Fail, Steps: 3},
	}
	if w := worstRun(runs); w != 3 {
		t.Errorf("worst %d, want 3 (the first failure with the fewest steps)", w)
	}
	if w := worstRun(runs[:3:3]); w != 1 {
		t.Errorf("worst %d, want 1", w)
	}
	if w := worstRun([]SeedRun{runs[0], runs[2]}); w != 1 {
		t.Errorf("worst of passes %d, want the higher utilization", w)
	}
}

// TestInvalidSeedRunsAreNotFailures: a run the host spoiled (outcome
// invalid) says nothing about the firmware, so it is left out of the pass
// rate and counted apart, not counted as a failure.
func TestInvalidSeedRunsAreNotFailures(t *testing.T) {
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	// Seeds sc.Sensors.Seed+0…+3: the second is spoiled by the host, the
	// fourth fails, the others pass.
	runner := func(_ context.Context, v *scenarios.Scenario, o rig.Options) (rig.Result, error) {
		out := record.Pass
		switch v.Sensors.Seed - sc.Sensors.Seed {
		case 1:
			out = record.Invalid
		case 3:
			out = record.Fail
		}
		return rig.Result{Dir: o.RunDir, Summary: record.Summary{Outcome: out}}, nil
	}
	res, err := RunSeeds(context.Background(), Scheduler{Runner: runner}, sc, 4, rig.Options{}, t.TempDir())
	if err != nil {
		t.Fatal(err)
	}
	lo, hi := Wilson(2, 3, WilsonZ95)
	if res.Passed != 2 || res.N != 3 || res.Invalid != 1 || res.Rate != 2.0/3 || res.Low != lo || res.High != hi {
		t.Errorf("passed %d of %d (%d invalid), rate %v [%v, %v]; want 2 of 3 valid runs, 1 invalid, rate 2/3 [%v, %v]",
			res.Passed, res.N, res.Invalid, res.Rate, res.Low, res.High, lo, hi)
	}
}

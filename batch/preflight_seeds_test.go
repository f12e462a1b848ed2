package batch

import (
	"context"
	"math"
	"strings"
	"sync"
	"testing"

	"gaitrig/record"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// TestPreflightSeedsEveryCheck: with Seeds 3 every check of the battery
// runs with three seeds (not only the nominal one), a check passes only
// when every seed does, and a failing check gives its pass rate with the
// Wilson interval and its worst run's folder. The firmware is a Runner
// that fails the second seed of the latency check only.
func TestPreflightSeedsEveryCheck(t *testing.T) {
	base, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	var mu sync.Mutex
	seeds := map[string]map[int64]bool{}
	p := Preflight{Dir: t.TempDir(), Jobs: 2, Seeds: 3}
	p.Runner = func(_ context.Context, s *scenarios.Scenario, o rig.Options) (rig.Result, error) {
		check := s.Name[:strings.LastIndex(s.Name, "-seed")]
		mu.Lock()
		if seeds[check] == nil {
			seeds[check] = map[int64]bool{}
		}
		seeds[check][s.Sensors.Seed] = true
		mu.Unlock()
		sum := record.Summary{Outcome: record.Pass, Steps: 30, PeakFrictionUtilization: 0.5}
		if check == base.Name+"-latency" && s.Sensors.Seed == base.Sensors.Seed+1 {
			sum = record.Summary{Outcome: record.Fail, Reason: "fell", Steps: 12}
		}
		return rig.Result{Dir: o.RunDir, Summary: sum}, nil
	}
	var reported []int
	p.OnDone = func(i int, d Done) { reported = append(reported, i) }
	vs, err := p.Variants(base)
	if err != nil {
		t.Fatal(err)
	}
	res, err := p.Run(context.Background(), vs)
	if err != nil {
		t.Fatal(err)
	}
	if res.Go {
		t.Error("GO with a failing seed")
	}
	if len(reported) != len(vs) {
		t.Errorf("OnDone called for checks %v, want one call per check", reported)
	}
	for i, c := range res.Checks {
		name := vs[i].Name
		if len(seeds[name]) != 3 || c.Seeds == nil || len(c.Seeds.Runs) != 3 {
			t.Errorf("%s: ran seeds %v, result %+v: want 3 seeds", name, seeds[name], c.Seeds)
			continue
		}
		if c.Check.Name != "latency" {
			if !c.Pass || c.Seeds.Passed != 3 {
				t.Errorf("%s: pass %v, %d of 3 seeds", name, c.Pass, c.Seeds.Passed)
			}
			continue
		}
		lo, hi := Wilson(2, 3, WilsonZ95)
		worst := c.Seeds.Runs[c.Seeds.Worst]
		if c.Pass || c.Seeds.Passed != 2 || c.Seeds.N != 3 || math.Abs(c.Seeds.Low-lo) > 1e-15 || math.Abs(c.Seeds.High-hi) > 1e-15 ||
			worst.Seed != base.Sensors.Seed+1 || c.Result.Dir != worst.Dir || !strings.HasSuffix(worst.Dir, "-latency-seed2") {
			t.Errorf("latency: pass %v, %d/%d seeds, interval %g … %g (want %g … %g), worst %+v, run %s", c.Pass, c.Seeds.Passed, c.Seeds.N, c.Seeds.Low, c.Seeds.High, lo, hi, worst, c.Result.Dir)
		}
		if s := strings.Join(c.Problems, "; "); !strings.Contains(s, "2 of 3 seeds passed") || !strings.Contains(s, worst.Dir) {
			t.Errorf("latency problems %q: want the rate and the worst run's folder", s)
		}
		if res.Results[i].Scenario != name {
			t.Errorf("JUnit case %q, want the check %q", res.Results[i].Scenario, name)
		}
	}
}

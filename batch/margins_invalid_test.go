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

// latencyRunner is a firmware judged by the added latency alone (a
// Runner that makes no walk): it fails from failMS on, and the host spoils
// the runs invalid says (attempt counts from 1; RUN.retry-K is attempt
// K+1, as Suite.retry names them).
func latencyRunner(failMS float64, invalid func(ms float64, attempt int) bool) (RunFunc, *int) {
	var mu sync.Mutex
	calls := 0
	return func(_ context.Context, s *scenarios.Scenario, o rig.Options) (rig.Result, error) {
		mu.Lock()
		calls++
		mu.Unlock()
		ms := 0.0
		for _, f := range s.Faults {
			if f.Kind == "latency" {
				ms = f.FixedMS
			}
		}
		attempt := 1
		if i := strings.LastIndex(o.RunDir, ".retry-"); i >= 0 {
			attempt = 1 + int(o.RunDir[i+len(".retry-")]-'0')
		}
		out, reason := record.Pass, ""
		if ms >= failMS {
			out, reason = record.Fail, "fell"
		}
		if invalid(ms, attempt) {
			out, reason = record.Invalid, "host_stall: the host stalled the loop"
		}
		return rig.Result{Dir: o.RunDir, Summary: record.Summary{Outcome: out, Reason: reason, Steps: 30}}, nil
	}, &calls
}

func latencySearch(t *testing.T, runner RunFunc) AxisMargin {
	t.Helper()
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	axes, _ := SelectAxes(DefaultAxes(Nominal{}), []string{"added_latency"})
	res, err := Margins{Dir: t.TempDir(), Runner: runner}.Run(context.Background(), sc, axes)
	if err != nil {
		t.Fatal(err)
	}
	return res[0]
}

// TestMarginsRetryARunTheHostSpoiled: every first attempt is spoiled (a
// host that stalls once per run); the retries measure every value and the
// limit is the firmware's, just under 10 ms, with the attempts recorded.
func TestMarginsRetryARunTheHostSpoiled(t *testing.T) {
	runner, _ := latencyRunner(10, func(_ float64, attempt int) bool { return attempt == 1 })
	a := latencySearch(t, runner)
	if a.NotMeasured != "" || a.Error != "" || a.Limit < 10-0.02*40 || a.Limit >= 10 {
		t.Fatalf("limit %g (not measured %q, error %q): want just under 10 ms", a.Limit, a.NotMeasured, a.Error)
	}
	if a.LastPass.Attempts != 2 || a.FirstFail.Attempts != 2 || !strings.HasSuffix(a.FirstFail.Dir, ".retry-1") {
		t.Errorf("deciding runs %+v / %+v: want the second attempts, in RUN.retry-1", *a.LastPass, *a.FirstFail)
	}
}

// TestMarginsNeverDecideALimitByASpoiledRun: a value the host spoils on
// every attempt is neither a pass nor a failure. Where the limit could lie
// (a grid point before the first failure, a bisection point) the axis is
// "not measured" with the reason; beyond the first failure it changes
// nothing.
func TestMarginsNeverDecideALimitByASpoiledRun(t *testing.T) {
	for _, tc := range []struct {
		name     string
		spoiled  func(ms float64) bool
		measured bool
		says     string
	}{
		// Grid 0, 8, 16, 24, 32, 40 ms; the firmware fails from 20 ms.
		{"grid point before the first failure", func(ms float64) bool { return ms == 8 }, false, "grid point 8 ms"},
		// Bracket 16 … 24, bisection 20 (fail), 18 (pass), 19 (spoiled).
		{"bisection point", func(ms float64) bool { return ms > 18.5 && ms < 19.5 }, false, "bisection point 19 ms"},
		{"the scenario as written", func(ms float64) bool { return ms == 0 }, false, "grid point 0 ms"},
		{"beyond the first failure", func(ms float64) bool { return ms == 32 }, true, ""},
	} {
		t.Run(tc.name, func(t *testing.T) {
			runner, calls := latencyRunner(20, func(ms float64, _ int) bool { return tc.spoiled(ms) })
			a := latencySearch(t, runner)
			if tc.measured {
				if a.NotMeasured != "" || a.Limit < 20-0.02*40 || a.Limit >= 20 {
					t.Errorf("limit %g, not measured %q: want just under 20 ms", a.Limit, a.NotMeasured)
				}
				return
			}
			if !strings.Contains(a.NotMeasured, tc.says) || !strings.Contains(a.NotMeasured, "host_stall") || !math.IsNaN(a.Limit) || a.Meets || a.LastPass != nil || a.FirstFail != nil {
				t.Errorf("limit %g meets %v, not measured %q: want no limit, %q named with the host's reason", a.Limit, a.Meets, a.NotMeasured, tc.says)
			}
			// The spoiled value was run 1 + DefaultMarginRetries times.
			if *calls < 1+DefaultMarginRetries {
				t.Errorf("%d runs", *calls)
			}
			c := MarginsSuite("level-demo", []AxisMargin{a}).Cases[0]
			if c.Error == "" || c.Failure != "" {
				t.Errorf("JUnit case %+v: want an <error> (the host's fault), not a failure", c)
			}
			pg := MarginsPage("level-demo", "", []AxisMargin{a})
			if !strings.HasPrefix(pg.Axes[0].FailReason, "not measured") {
				t.Errorf("page reason %q", pg.Axes[0].FailReason)
			}
		})
	}
}

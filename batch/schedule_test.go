package batch

import (
	"bytes"
	"context"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"sync"
	"testing"
	"time"

	"gaitrig/rig"
	"gaitrig/scenarios"
)

func builtin(t *testing.T, name string) *scenarios.Scenario {
	t.Helper()
	s, err := scenarios.LoadBuiltin(name)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// TestSchedulerOrderAndSharing runs jobs through a runner that records
// what happens, without a clock: job 0 waits until job 1 has started (so
// with Jobs=2 both must be running at once), a wall-clock job must find
// itself alone, every job runs exactly once, and OnDone sees the jobs in
// their order, each after it finished.
func TestSchedulerOrderAndSharing(t *testing.T) {
	lockstep := builtin(t, "level-demo")
	wall := builtin(t, "latency-stress")
	if Shareable(wall, "", "") || !Shareable(lockstep, "", "") {
		t.Fatal("latency-stress is expected to be a wall-clock scenario and level-demo a lockstep one")
	}
	scs := []*scenarios.Scenario{lockstep, lockstep, wall, lockstep, lockstep}
	for _, jobs := range []int{1, 2, 3} {
		t.Run(fmt.Sprintf("jobs=%d", jobs), func(t *testing.T) {
			var mu sync.Mutex
			calls := make([]int, len(scs))
			finished := make([]bool, len(scs))
			inflight, maxInflight := 0, 0
			// Jobs 0 and 1 each wait, once started, for the other to start:
			// with two workers they must be in flight together, in whatever
			// order a busy host starts them.
			started := [2]chan struct{}{make(chan struct{}), make(chan struct{})}
			runner := func(ctx context.Context, sc *scenarios.Scenario, o rig.Options) (rig.Result, error) {
				i, _ := strconv.Atoi(o.RunDir)
				mu.Lock()
				calls[i]++
				inflight++
				maxInflight = max(maxInflight, inflight)
				if sc == wall && inflight != 1 {
					t.Errorf("the wall-clock job ran alongside %d others", inflight-1)
				}
				mu.Unlock()
				if i < 2 {
					close(started[i])
				}
				if i < 2 && jobs > 1 {
					// A bound so a broken scheduler fails instead of hanging;
					// the assertion is the event, not the time.
					select {
					case <-started[1-i]:
					case <-time.After(time.Minute):
						t.Errorf("job %d never ran alongside job %d", i, 1-i)
					}
				}
				mu.Lock()
				inflight--
				finished[i] = true
				mu.Unlock()
				return rig.Result{Dir: o.RunDir}, nil
			}
			var order []int
			jl := make([]Job, len(scs))
			for i, sc := range scs {
				jl[i] = Job{Scenario: sc, Options: rig.Options{RunDir: strconv.Itoa(i)}}
			}
			got := Scheduler{Jobs: jobs, Runner: runner, OnDone: func(i int, d Done) {
				mu.Lock()
				defer mu.Unlock()
				if !finished[i] {
					t.Errorf("OnDone(%d) before the job finished", i)
				}
				order = append(order, i)
			}}.RunAll(context.Background(), jl)
			for i := range scs {
				if calls[i] != 1 {
					t.Errorf("job %d ran %d times", i, calls[i])
				}
				if got[i].Result.Dir != strconv.Itoa(i) || got[i].Job.Options.RunDir != strconv.Itoa(i) {
					t.Errorf("result %d is that of job %q", i, got[i].Result.Dir)
				}
				if len(order) != len(scs) || order[i] != i {
					t.Fatalf("OnDone order %v, want the order of the jobs", order)
				}
			}
			if jobs == 1 && maxInflight != 1 {
				t.Errorf("Jobs=1 ran %d at once", maxInflight)
			}
			if jobs > 1 && maxInflight < 2 {
				t.Errorf("Jobs=%d never ran two at once", jobs)
			}
		})
	}
}

func TestSchedulerAfterCancel(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	calls := 0
	runner := func(context.Context, *scenarios.Scenario, rig.Options) (rig.Result, error) {
		calls++
		return rig.Result{}, nil
	}
	sc := builtin(t, "level-demo")
	got := Scheduler{Runner: runner}.RunAll(ctx, []Job{{Scenario: sc}, {Scenario: sc}})
	if calls != 0 || got[0].Err != context.Canceled || got[1].Err != context.Canceled {
		t.Errorf("after cancel: %d calls, errors %v, %v; want none and context.Canceled", calls, got[0].Err, got[1].Err)
	}
}

// wallTime matches the summary fields that depend on the machine: the
// wall time, and the rig's own stalls that a loaded host causes (measured
// in lockstep too, where they change nothing else).
var wallTime = regexp.MustCompile(`"(wall_time_s|host_stall_s|longest_host_stall_s)": [^,\n]*`)

// TestSuiteIsTheSameWithOneOrTwoJobs runs real lockstep scenarios through
// rig.Run with the built-in firmware, one at a time and two at once:
// lockstep is deterministic, so every summary.json and steps.csv must be
// byte for byte the same (wall time aside), and so must the verdicts.
func TestSuiteIsTheSameWithOneOrTwoJobs(t *testing.T) {
	if testing.Short() {
		t.Skip("runs three scenarios twice; skipped with -short")
	}
	var scs []*scenarios.Scenario
	for _, n := range []string{"slope-change", "push-recovery", "low-friction-patch"} {
		scs = append(scs, builtin(t, n))
	}
	root := t.TempDir()
	results := map[int]SuiteResult{}
	for _, jobs := range []int{1, 2} {
		dir := filepath.Join(root, strconv.Itoa(jobs))
		calls := 0
		var mu sync.Mutex
		var progress []string
		res := Suite{Dir: dir, Jobs: jobs,
			Runner: func(ctx context.Context, sc *scenarios.Scenario, o rig.Options) (rig.Result, error) {
				mu.Lock()
				calls++
				mu.Unlock()
				return rig.Run(ctx, sc, o)
			},
			OnDone: func(i int, d Done) { progress = append(progress, d.Job.Scenario.Name) },
		}.Run(context.Background(), scs)
		if calls != len(scs) {
			t.Errorf("jobs=%d: rig.Run called %d times for %d scenarios", jobs, calls, len(scs))
		}
		if fmt.Sprint(progress) != "[slope-change push-recovery low-friction-patch]" {
			t.Errorf("jobs=%d: progress in order %v", jobs, progress)
		}
		for _, d := range res.Runs {
			if d.Err != nil {
				t.Fatalf("jobs=%d: %s: %v", jobs, d.Job.Scenario.Name, d.Err)
			}
			if want := filepath.Join(dir, d.Job.Scenario.Name); d.Result.Dir != want {
				t.Errorf("run folder %s, want %s", d.Result.Dir, want)
			}
		}
		results[jobs] = res
	}
	for _, sc := range scs {
		for _, f := range []string{"summary.json", "steps.csv"} {
			a, errA := os.ReadFile(filepath.Join(root, "1", sc.Name, f))
			b, errB := os.ReadFile(filepath.Join(root, "2", sc.Name, f))
			if errA != nil || errB != nil {
				t.Fatal(errA, errB)
			}
			if f == "summary.json" && !wallTime.Match(a) {
				t.Fatalf("summary.json has no wall_time_s field for this test to mask:\n%s", a)
			}
			a, b = wallTime.ReplaceAll(a, nil), wallTime.ReplaceAll(b, nil)
			if !bytes.Equal(a, b) {
				t.Errorf("%s/%s differs between one and two jobs:\n%s\n---\n%s", sc.Name, f, a, b)
			}
		}
	}
	one, two := results[1], results[2]
	if one.Failed != two.Failed || len(one.Results) != len(two.Results) {
		t.Fatalf("verdicts differ: %d vs %d failed", one.Failed, two.Failed)
	}
	for i := range one.Results {
		a, b := one.Results[i], two.Results[i]
		a.Seconds, b.Seconds = 0, 0
		if fmt.Sprintf("%+v", a) != fmt.Sprintf("%+v", b) {
			t.Errorf("verdict %d differs: %+v vs %+v", i, a, b)
		}
	}
	// The first run as a baseline for the second: no regression.
	bl := &Baseline{Tolerances: DefaultTolerances, Scenarios: one.Entries}
	for _, d := range two.Runs {
		if _, reg := Judge(bl, d.Job.Scenario.Name, d.Result.Summary); len(reg) > 0 {
			t.Errorf("%s regressed against an identical run: %v", d.Job.Scenario.Name, reg)
		}
	}
}

package batch

import (
	"context"
	"sync"
	"time"

	"gaitrig/hil"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// RunFunc runs one scenario; rig.Run is the one the package uses unless a
// caller sets another (a test that counts calls).
type RunFunc func(ctx context.Context, sc *scenarios.Scenario, o rig.Options) (rig.Result, error)

// Job is one run of a batch: a scenario and the options it runs with.
type Job struct {
	// Scenario is the scenario to run.
	Scenario *scenarios.Scenario
	// Options are the rig options of the run (its run folder, link, …).
	Options rig.Options
}

// Done is a finished job.
type Done struct {
	// Job is the job as it was given.
	Job Job
	// Result is what rig.Run returned; meaningful when Err is nil.
	Result rig.Result
	// Err is why the run could not be carried out, if it could not.
	Err error
	// Seconds is the wall time the run took (for the JUnit file and
	// progress lines; it differs from run to run and is not compared).
	Seconds float64
}

// Scheduler runs jobs, several at once where that cannot change their
// results, and gives the results back in the order of the jobs, so the
// output of a batch does not depend on how many ran at once. The zero
// value runs one job at a time through rig.Run.
type Scheduler struct {
	// Jobs is how many runs may go at once. Default (0 or less) 1. Only
	// lockstep runs against an in-process firmware share the machine (see
	// Shareable): their results do not depend on timing. The others run
	// one at a time after them, so their timing is not disturbed.
	Jobs int
	// Runner runs one job. Default rig.Run.
	Runner RunFunc
	// OnDone, when not nil, is called once per job, in the order of the
	// jobs (job i only after jobs 0…i−1), one call at a time: a progress
	// printout is then the same whatever Jobs is.
	OnDone func(i int, d Done)
}

// Shareable reports whether a run of sc with link override link ("" for
// the scenario's own) and clock override clock ("" for the scenario's)
// may share the machine with other runs without changing its result: a
// lockstep run against the in-process firmware (or none).
func Shareable(sc *scenarios.Scenario, link string, clock hil.ClockMode) bool {
	if clock == hil.Wallclock || (clock == "" && sc.Clock.Mode == scenarios.ClockWallclock) {
		return false
	}
	if link != "" {
		l, err := rig.ParseLink(link)
		return err == nil && l.InProcess()
	}
	l := sc.Controller.Link
	return l == scenarios.LinkBuiltin || l == scenarios.LinkNone
}

// RunAll runs every job and returns what became of each, in the order of
// jobs. A job that fails has its Err set; the others still run. When ctx
// is cancelled the runs in progress end as aborted (rig.Run's behaviour)
// and the jobs not yet started end with ctx's error.
func (s Scheduler) RunAll(ctx context.Context, jobs []Job) []Done {
	run := s.Runner
	if run == nil {
		run = rig.Run
	}
	workers := s.Jobs
	if workers < 1 {
		workers = 1
	}
	out := make([]Done, len(jobs))
	finished := make([]bool, len(jobs))
	next := 0 // the first job not yet handed to OnDone
	var mu sync.Mutex
	one := func(i int) {
		d := Done{Job: jobs[i]}
		if err := ctx.Err(); err != nil {
			d.Err = err
		} else {
			start := time.Now()
			d.Result, d.Err = run(ctx, jobs[i].Scenario, jobs[i].Options)
			d.Seconds = time.Since(start).Seconds()
		}
		mu.Lock()
		defer mu.Unlock()
		out[i] = d
		finished[i] = true
		for next < len(jobs) && finished[next] {
			if s.OnDone != nil {
				s.OnDone(next, out[next])
			}
			next++
		}
	}
	var pooled, alone []int
	for i, j := range jobs {
		if Shareable(j.Scenario, j.Options.Link, j.Options.Clock) {
			pooled = append(pooled, i)
		} else {
			alone = append(alone, i)
		}
	}
	work := make(chan int)
	var wg sync.WaitGroup
	for w := 0; w < min(workers, len(pooled)); w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range work {
				one(i)
			}
		}()
	}
	for _, i := range pooled {
		work <- i
	}
	close(work)
	wg.Wait()
	for _, i := range alone {
		one(i)
	}
	return out
}

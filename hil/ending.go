package hil

// This file owns the end of a run: the one place the outcome, its reason
// and the stop code for the firmware are decided (first wins), the end
// conditions checked after every tick, and the summary written at the end.

import (
	"context"
	"errors"
	"fmt"
	"math"
	"time"

	"gaitrig/bridges/protocol"
	"gaitrig/record"
)

// ending is how the run ends: outcome, the reason in words and the stop
// code the firmware is sent. The first end to be set wins: a trip caused by
// an earlier alarm is the run's story even if the link then closes, so
// every place that ends the run goes through end and none assigns the
// fields itself. The zero value is a run still going.
type ending struct {
	outcome  record.Outcome
	reason   string
	stopCode uint8 // protocol.Stop…; StopEnd (0) until an end sets another
}

// end sets the run's outcome, reason and stop code unless an earlier end
// was set, and reports whether this one took.
func (e *ending) end(outcome record.Outcome, reason string, stopCode uint8) bool {
	if e.outcome != "" {
		return false
	}
	e.outcome, e.reason, e.stopCode = outcome, reason, stopCode
	return true
}

// set reports whether the run has an outcome.
func (e *ending) set() bool { return e.outcome != "" }

// done reports whether the run has reached its end or an outcome.
func (r *runner) done() bool {
	if r.end.set() {
		return true
	}
	if r.cfg.MaxSteps > 0 && r.steps.count >= r.cfg.MaxSteps {
		return true
	}
	// Compare tick counts, not accumulated time, so the end tick does not
	// depend on rounding.
	if r.cfg.Duration > 0 && float64(r.pt.tick) >= math.Round(r.cfg.Duration*r.cfg.TickHz) {
		return true
	}
	return false
}

// aborted checks ctx without blocking or allocating.
func (r *runner) aborted(ctx context.Context) bool {
	select {
	case <-ctx.Done():
		reason := "interrupted by the operator (" + context.Cause(ctx).Error() + ")"
		if r.end.end(record.Aborted, reason, protocol.StopAborted) {
			r.al.info("aborted", r.pt.tick, r.pt.s.T, reason, nil)
		}
		return true
	default:
		return false
	}
}

// failed ends the run with outcome aborted because of err, unless it has
// an outcome already (a refused firmware keeps its own stop code).
func (r *runner) failed(err error) {
	r.end.end(record.Aborted, err.Error(), protocol.StopAborted)
}

// finish evaluates the criteria, writes the summary and closes the record.
func (r *runner) finish(runErr error) (Result, error) {
	tm := &r.times
	res := Result{Greeting: r.sess.greeting, Final: r.pt.s, Link: r.linkCounts(), Realtime: tm.realtime,
		Latency: tm.latency.Summarize(), Jitter: tm.jitter.Summarize(), DeadlineMisses: tm.misses,
		Transport: r.sess.link.Stats()}
	sum := record.Summary{
		Outcome:                 r.end.outcome,
		Reason:                  r.end.reason,
		Steps:                   r.steps.count,
		Ticks:                   r.pt.tick,
		SimTimeS:                r.pt.s.T,
		WallTimeS:               time.Since(r.started).Seconds(),
		Alarms:                  r.al.counts,
		PeakFrictionUtilization: r.pt.contact.peakUtil,
		MinNormalForceN:         r.pt.contact.minNormal,
		MeanSpeedMPS:            r.steps.meanSpeed(),
		DeadlineMisses:          int(tm.misses),
		StaleCommands:           res.Link.StaleCommands,
		LateTicks:               r.stalls.lateTicks,
		HostStallS:              r.stalls.total.Seconds(),
		LongestHostStallS:       r.stalls.longest.Seconds(),
	}
	sum.MinKneeLockTorqueNM = r.pt.knees.summary(r.m)
	if r.cfg.Clock == Wallclock {
		l, j := res.Latency, res.Jitter
		sum.LatencyUS = latencyOf(l)
		sum.JitterUS = latencyOf(j)
	}
	sum.Criteria = evaluate(&r.cfg.Criteria, &sum)
	if sum.Outcome == "" {
		sum.Outcome = record.Pass
		for _, c := range sum.Criteria {
			if !c.Pass {
				sum.Outcome = record.Fail
				if sum.Reason == "" {
					sum.Reason = fmt.Sprintf("criterion %s not met: %g against the limit %g", c.Name, c.Value, c.Limit)
				}
			}
		}
	}
	r.al.info("run_end", r.pt.tick, r.pt.s.T, "run ended: "+string(sum.Outcome)+reasonSuffix(sum.Reason),
		map[string]float64{"steps": float64(sum.Steps), "ticks": float64(sum.Ticks)})
	res.Summary = sum
	r.al.close()
	var errs []error
	if runErr != nil {
		errs = append(errs, runErr)
	}
	if r.al.logErr != nil {
		errs = append(errs, fmt.Errorf("hil: event log: %w", r.al.logErr))
	}
	if r.rec != nil {
		if err := r.rec.Close(sum); err != nil {
			errs = append(errs, err)
		}
	}
	return res, errors.Join(errs...)
}

// latencyOf is the summary's form of a histogram: with no samples the
// figures are NaN (null in summary.json, "–" on the terminal), since a
// run that measured nothing did not measure zero.
func latencyOf(s Summary) *record.Latency {
	if s.Count == 0 {
		return &record.Latency{P50: nan, P99: nan, Max: nan}
	}
	return &record.Latency{P50: s.P50, P99: s.P99, Max: s.Max, Count: s.Count}
}

func reasonSuffix(s string) string {
	if s == "" {
		return ""
	}
	return " (" + s + ")"
}

// evaluate checks the criteria against the summary.
func evaluate(c *Criteria, s *record.Summary) []record.Criterion {
	out := []record.Criterion{}
	if c.MinSteps > 0 {
		out = append(out, record.Criterion{Name: "min_steps", Value: float64(s.Steps), Limit: float64(c.MinSteps), Pass: s.Steps >= c.MinSteps})
	}
	if c.NoTrip == nil || *c.NoTrip {
		v := 0.0
		if s.Outcome == record.Tripped {
			v = 1
		}
		out = append(out, record.Criterion{Name: "no_trip", Value: v, Limit: 0, Pass: v == 0})
	}
	if c.MinSpeedMPS != nil {
		out = append(out, record.Criterion{Name: "min_speed_mps", Value: s.MeanSpeedMPS, Limit: *c.MinSpeedMPS, Pass: s.MeanSpeedMPS >= *c.MinSpeedMPS})
	}
	if c.MaxSpeedMPS != nil {
		out = append(out, record.Criterion{Name: "max_speed_mps", Value: s.MeanSpeedMPS, Limit: *c.MaxSpeedMPS, Pass: s.MeanSpeedMPS <= *c.MaxSpeedMPS})
	}
	if c.MaxFrictionUtilization != nil {
		out = append(out, record.Criterion{Name: "max_friction_utilization", Value: s.PeakFrictionUtilization, Limit: *c.MaxFrictionUtilization,
			Pass: s.PeakFrictionUtilization <= *c.MaxFrictionUtilization})
	}
	if c.MinNormalForceN != nil {
		out = append(out, record.Criterion{Name: "min_normal_force_n", Value: s.MinNormalForceN, Limit: *c.MinNormalForceN, Pass: s.MinNormalForceN >= *c.MinNormalForceN})
	}
	if c.MaxLatencyP99US != nil && s.LatencyUS != nil {
		// No samples: the value is NaN and the criterion is not met (a limit
		// on a figure nobody measured cannot be said to hold).
		out = append(out, record.Criterion{Name: "max_latency_p99_us", Value: s.LatencyUS.P99, Limit: *c.MaxLatencyP99US, Pass: s.LatencyUS.P99 <= *c.MaxLatencyP99US})
	}
	return out
}

package rig

import (
	"errors"
	"testing"

	"gaitrig/hil"
	"gaitrig/internal/retrytest"
	"gaitrig/record"
)

// MeasureLink runs the demo on the wall clock over the named link with no
// run folder. What is checked are counts, not times: the run covers the
// ticks asked for (unless the host stalled it into a watchdog trip, which
// the result then says), and round trips were measured, no more than
// commands came back.
func TestMeasureLinkCounts(t *testing.T) {
	for _, link := range []string{"inproc", "pty"} {
		t.Run(link, func(t *testing.T) {
			// A saturated host may not run the firmware at all in a run of
			// 0.3 s: nothing comes back and nothing can be checked. Such a
			// run is measured again, as one the host spoiled, at most
			// three times (as retrytest does for invalid runs).
			var res hil.Result
			for n := 1; ; n++ {
				var err error
				res, _, err = MeasureLink(link, 300, 1000, "", -1)
				if err != nil {
					t.Fatal(err)
				}
				if res.Link.Commands+res.Link.StaleCommands > 0 || n == retrytest.MaxAttempts {
					break
				}
				t.Logf("attempt %d: no command came back in %d ticks (%s, %s); the host did not run the firmware, measuring again", n, res.Summary.Ticks, res.Summary.Outcome, res.Summary.Reason)
			}
			s := res.Summary
			if s.Outcome == record.Tripped {
				t.Logf("tripped on this host after %d ticks: %s", s.Ticks, s.Reason)
			} else if s.Ticks != 300 {
				t.Fatalf("%d ticks measured, asked for 300 (outcome %s, %s)", s.Ticks, s.Outcome, s.Reason)
			}
			// Every command that came back was timed, those taken and those
			// superseded by a newer one before a tick took them (stale).
			if got := res.Link.Commands + res.Link.StaleCommands; res.Latency.Count == 0 || res.Latency.Count > got {
				t.Errorf("%d round trips measured for %d commands taken and %d stale", res.Latency.Count, res.Link.Commands, res.Link.StaleCommands)
			}
		})
	}
	if _, _, err := MeasureLink("builtin", 300, 1000, "", -1); !errors.Is(err, ErrConfig) {
		t.Errorf("an unknown link name: %v, want a configuration error", err)
	}
}

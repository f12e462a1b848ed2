package main

import (
	"bytes"
	"math"
	"strings"
	"testing"

	"gaitrig/record"
	"gaitrig/rig"
)

// A run that timed no command prints a dash for each latency figure, not
// a zero that reads as a very fast firmware; one that did prints them.
func TestLatencyWithNoSamplesPrintsADash(t *testing.T) {
	nan := math.NaN()
	var b bytes.Buffer
	printSummary(&b, rig.Result{Summary: record.Summary{Outcome: record.Tripped, LatencyUS: &record.Latency{P50: nan, P99: nan, Max: nan}}})
	if !strings.Contains(b.String(), "p50 –, p99 –, max –") || strings.Contains(b.String(), "0 µs") {
		t.Errorf("no samples printed as:\n%s", b.String())
	}
	b.Reset()
	printSummary(&b, rig.Result{Summary: record.Summary{Outcome: record.Pass, LatencyUS: &record.Latency{P50: 120, P99: 480, Max: 900, Count: 10}}})
	if !strings.Contains(b.String(), "p50 120 µs, p99 480 µs, max 900 µs") {
		t.Errorf("samples printed as:\n%s", b.String())
	}
}

func TestInvalidRunExitsThree(t *testing.T) {
	for o, want := range map[record.Outcome]int{record.Pass: 0, record.Fail: 1, record.Tripped: 1, record.Aborted: 1, record.Invalid: 3} {
		if got := outcomeCode(o); got != want {
			t.Errorf("outcome %s exits %d, want %d", o, got, want)
		}
	}
}

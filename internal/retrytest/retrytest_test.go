package retrytest

import (
	"fmt"
	"testing"

	"gaitrig/record"
)

// fatalTB records a Fatalf instead of ending the test, so the helper's
// failure path can be checked.
type fatalTB struct {
	testing.TB
	failed string
}

func (f *fatalTB) Fatalf(format string, a ...any) { f.failed = fmt.Sprintf(format, a...) }

func TestUntilValid(t *testing.T) {
	outcomes := func(seq ...record.Outcome) func(n int) (int, record.Summary) {
		return func(n int) (int, record.Summary) {
			return n, record.Summary{Outcome: seq[n-1], Reason: "host_stall"}
		}
	}
	// Invalid, then a verdict: the verdict's attempt is returned.
	if got := UntilValid(t, "x", outcomes(record.Invalid, record.Pass, record.Pass)); got != 2 {
		t.Errorf("invalid then pass: got attempt %d, want 2", got)
	}
	// A firmware fault is never retried away.
	if got := UntilValid(t, "x", outcomes(record.Tripped, record.Pass, record.Pass)); got != 1 {
		t.Errorf("tripped: got attempt %d, want 1 (no retry)", got)
	}
	// Every attempt invalid fails the test.
	f := &fatalTB{TB: t}
	UntilValid(f, "x", outcomes(record.Invalid, record.Invalid, record.Invalid))
	if f.failed == "" {
		t.Error("three invalid attempts did not fail the test")
	}
}

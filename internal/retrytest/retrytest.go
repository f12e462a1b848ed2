// Package retrytest is the one helper by which tests run again a walk the
// host spoiled (outcome invalid), as a nightly rig does: bounded, logged,
// and never retrying a firmware fault away.
package retrytest

import (
	"strings"
	"testing"

	"gaitrig/record"
)

// MaxAttempts bounds how often a test runs again a walk the host spoiled.
// A nightly rig runs an invalid run again (issue 14); a test does the
// same, a few times, so a saturated CI machine cannot fail it by starving
// the firmware's process, yet a host that starves every attempt still
// fails it rather than passing it unseen.
const MaxAttempts = 3

// UntilValid runs attempt, with a fresh set-up each time, until it returns
// a run whose outcome is not invalid, and returns that run for the caller
// to judge in full. An invalid run (host_stall: the host, not the
// firmware, spoiled it) is logged with its reason and run again, at most
// MaxAttempts times in all; any other outcome, pass or not, ends the
// retries at once, so a firmware fault is never retried away. If every
// attempt was invalid the test fails.
func UntilValid[R any](t testing.TB, what string, attempt func(n int) (R, record.Summary)) R {
	t.Helper()
	var reasons []string
	for n := 1; n <= MaxAttempts; n++ {
		r, sum := attempt(n)
		if sum.Outcome != record.Invalid {
			return r
		}
		reasons = append(reasons, sum.Reason)
		t.Logf("%s: attempt %d of %d ended invalid (%s); the host spoiled it, running it again as a nightly rig would", what, n, MaxAttempts, sum.Reason)
	}
	t.Fatalf("%s: the host starved every one of %d attempts (all invalid: %s); the run says nothing about the firmware", what, MaxAttempts, strings.Join(reasons, "; "))
	var zero R
	return zero
}

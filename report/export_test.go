package report

import (
	"testing"
	"time"
)

// Helpers of the internal tests that the external tests (package
// report_test, which may import rig) use as well.
var (
	FindChromium = findChromium
	RunChromium  = func(t *testing.T, bin string, timeout time.Duration, args ...string) []byte {
		return runChromium(t, bin, timeout, args...)
	}
)

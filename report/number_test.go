package report

import (
	"math"
	"testing"
)

// The table spelling, case by case: each row is what a person reads in the
// suite, preflight and run tables for that value.
func TestFormatNumber(t *testing.T) {
	for _, c := range []struct {
		v    float64
		want string
	}{
		{math.NaN(), "-"},
		{math.Inf(1), "+Inf"},
		{math.Inf(-1), "-Inf"},
		{0, "0"},
		{42, "42"},
		{-7, "-7"},
		{999999, "999999"},
		{1e6, "1e+06"},
		{123456.5, "1.235e+05"},
		{0.0005, "0.0005"},
		{0.00012345, "0.0001234"},
		{250.25, "250.2"},
		{3.14159, "3.142"},
		{-0.5, "-0.500"},
	} {
		if got := FormatNumber(c.v); got != c.want {
			t.Errorf("FormatNumber(%v) = %q, want %q", c.v, got, c.want)
		}
	}
}

package report

import (
	"math"
	"strconv"
)

// FormatNumber prints a number compactly for tables and verdicts: integers
// without a point, three decimals below 100, one up to 1e5, four
// significant digits beyond or below 1e-3; NaN prints as "-". It is the
// spelling of gaitrig's tables.
func FormatNumber(v float64) string {
	if math.IsNaN(v) {
		return "-"
	}
	if math.IsInf(v, 0) {
		return strconv.FormatFloat(v, 'f', -1, 64)
	}
	a := math.Abs(v)
	switch {
	case a == 0:
		return "0"
	case v == math.Trunc(v) && a < 1e6:
		return strconv.FormatFloat(v, 'f', 0, 64)
	case a >= 1e5 || a < 1e-3:
		return strconv.FormatFloat(v, 'g', 4, 64)
	case a >= 100:
		return strconv.FormatFloat(v, 'f', 1, 64)
	default:
		return strconv.FormatFloat(v, 'f', 3, 64)
	}
}

package main

import (
	"math"
	"sort"
	"strconv"
)

// sortedKeys returns the keys of m in order, for stable output.
func sortedKeys[V any](m map[string]V) []string {
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	return keys
}

// fmtNum prints a number compactly for tables; NaN prints as "-".
func fmtNum(v float64) string {
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

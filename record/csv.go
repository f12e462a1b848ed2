package record

import (
	"sort"
	"strings"
)

func csvHeader(cols []string) string { return strings.Join(cols, ",") + "\n" }

func sortedKeys(m map[string]float64) []string {
	k := make([]string, 0, len(m))
	for s := range m {
		k = append(k, s)
	}
	sort.Strings(k)
	return k
}

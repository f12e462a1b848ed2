package batch

import (
	"fmt"
	"strings"

	"gaitrig/scenarios"
)

// variantText writes the text a variant records: a header naming the base
// scenario, its SHA-256 and the change in words; the variant's fields as
// YAML (scenarios.Format: the text loads back into exactly the variant);
// and the base's text, commented out, at the end.
func variantText(v, base *scenarios.Scenario, what string) ([]byte, error) {
	return scenarios.Format(v, variantHeader(v, base, what), commentedBase(base))
}

func variantHeader(v, base *scenarios.Scenario, what string) string {
	var b strings.Builder
	fmt.Fprintf(&b, "# Variant %q of scenario %s, derived by gaitrig.\n", v.Name, base.Name)
	fmt.Fprintf(&b, "# Base: %s, SHA-256 %s (its text is at the end, commented out).\n", oneLine(base.File), scenarios.Hash(base.Text))
	fmt.Fprintf(&b, "# Change: %s\n", oneLine(what))
	b.WriteString("# The fields below are the variant as it runs: every non-zero value, and\n")
	b.WriteString("# every zero the loader would otherwise replace with its default.\n")
	return b.String()
}

func commentedBase(base *scenarios.Scenario) string {
	if len(base.Text) == 0 {
		return ""
	}
	var b strings.Builder
	b.WriteString("\n# Text of the base scenario:\n")
	for _, line := range strings.Split(strings.TrimRight(string(base.Text), "\n"), "\n") {
		b.WriteString("# | ")
		b.WriteString(strings.TrimRight(line, "\r"))
		b.WriteByte('\n')
	}
	return b.String()
}

func oneLine(s string) string { return strings.Join(strings.Fields(s), " ") }

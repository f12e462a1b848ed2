package batch

import (
	"fmt"

	"gaitrig/scenarios"
)

// Derive makes a variant of base named name: a deep copy of the typed
// scenario (Copy) with change applied to its fields. base is never
// changed, and every value base holds (an explicit zero such as
// encoder_counts_per_rev: 0 or seed: 0 included) is in the variant unless
// change sets it. what says the change in words; change may be nil for a
// variant that only renames.
//
// What a variant records: its File is base's file with " (variant NAME)"
// appended, and its Text, which the run manifest stores with its SHA-256,
// is a complete scenario file for the variant: a header naming the base
// scenario, the SHA-256 of the base's text and the change in words, then
// the variant's fields, then the base's text commented out. The text is
// checked to load back into exactly the variant, so a run folder made from
// a variant replays from its manifest alone, and the base it came from and
// what was changed stay readable in the same record.
//
// The variant is validated as any scenario file is: one the loader would
// refuse (a foot radius beyond the leg length, a slope past vertical)
// gives an error naming the field.
func Derive(base *scenarios.Scenario, name, what string, change func(*scenarios.Scenario)) (*scenarios.Scenario, error) {
	if base == nil {
		return nil, fmt.Errorf("variant %s: no base scenario", name)
	}
	v := Copy(base)
	if change != nil {
		change(v)
	}
	v.Name = name
	v.File = base.File + " (variant " + name + ")"
	v.Text = nil
	text, err := variantText(v, base, what)
	if err != nil {
		return nil, fmt.Errorf("variant %s of %s: %w", name, base.Name, err)
	}
	v.Text = text
	return v, nil
}

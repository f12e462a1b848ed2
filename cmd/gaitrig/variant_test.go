package main

import (
	"testing"

	"gaitrig/batch"
	"gaitrig/scenarios"
)

// variantOf derives a scenario for this package's tests (the MQTT
// end-to-end test writes one to a file and runs it). Variants live in
// batch (batch.Derive, tested there); this wrapper can go when its callers
// call batch.Derive themselves.
func variantOf(base *scenarios.Scenario, name string, mutate func(*scenarios.Scenario)) (*scenarios.Scenario, error) {
	return batch.Derive(base, name, "test variant "+name, mutate)
}

// TestVariantKeepsExplicitZeros (failed before variants moved to batch,
// when they were made by a YAML round trip that dropped zeros): a scenario that sets encoder_counts_per_rev,
// contact_threshold_n and seed to 0 explicitly (each has a non-zero default)
// must keep those zeros in every variant, the nominal one included.
func TestVariantKeepsExplicitZeros(t *testing.T) {
	text, err := scenarios.BuiltinText("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	text = append(text, []byte("sensors:\n  encoder_counts_per_rev: 0\n  contact_threshold_n: 0\n  seed: 0\n")...)
	base, err := scenarios.Parse("zeros.yaml", text)
	if err != nil {
		t.Fatal(err)
	}
	if base.Sensors.EncoderCountsPerRev != 0 || base.Sensors.ContactThresholdN != 0 || base.Sensors.Seed != 0 {
		t.Fatalf("the loader did not keep the explicit zeros: %+v", base.Sensors)
	}
	v, err := variantOf(base, "nominal", func(*scenarios.Scenario) {})
	if err != nil {
		t.Fatal(err)
	}
	if got := v.Sensors; got.EncoderCountsPerRev != 0 || got.ContactThresholdN != 0 || got.Seed != 0 {
		t.Errorf("nominal variant lost explicit zeros: encoder %d, contact threshold %v, seed %d",
			got.EncoderCountsPerRev, got.ContactThresholdN, got.Seed)
	}
}

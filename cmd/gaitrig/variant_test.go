package main

import (
	"testing"

	"gaitrig/scenarios"
)

func TestVariantIsValidatedAndKeepsItsText(t *testing.T) {
	base, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	v, err := variantOf(base, "half-friction", func(s *scenarios.Scenario) {
		for i := range s.Terrain.Segments {
			s.Terrain.Segments[i].MuStatic *= 0.5
			s.Terrain.Segments[i].MuKinetic *= 0.5
		}
	})
	if err != nil {
		t.Fatal(err)
	}
	if got, want := v.Terrain.Segments[0].MuStatic, base.Terrain.Segments[0].MuStatic/2; got != want {
		t.Errorf("variant μ_s = %v, want %v", got, want)
	}
	if base.Terrain.Segments[0].MuStatic == v.Terrain.Segments[0].MuStatic {
		t.Error("the variant changed the base scenario")
	}
	again, err := scenarios.Parse("again", v.Text)
	if err != nil {
		t.Fatalf("variant text does not load again: %v", err)
	}
	if again.Terrain.Segments[0].MuStatic != v.Terrain.Segments[0].MuStatic || again.Name != "half-friction" {
		t.Error("variant text does not describe the variant")
	}
	if _, err := variantOf(base, "broken", func(s *scenarios.Scenario) { s.Plant.Legs.FootRadiusM = 5 }); err == nil {
		t.Error("a variant with a foot radius beyond the leg length was accepted")
	}
}

// TestVariantKeepsExplicitZeros: a scenario that sets encoder_counts_per_rev,
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

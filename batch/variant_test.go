package batch

import (
	"reflect"
	"strings"
	"testing"

	"gaitrig/scenarios"
)

// zerosScenario is the level-demo scenario with every explicit zero we could
// give a field whose default is not zero (or which is required), plus a few
// whose default is zero anyway. Each must survive into every variant.
func zerosScenario(t *testing.T) *scenarios.Scenario {
	t.Helper()
	text, err := scenarios.BuiltinText("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	s := string(text)
	for _, r := range []struct{ old, new string }{
		{"  start_m: [-5, 0]\n", "  start_m: [0, 0]\n"},
		{"      mu_kinetic: 0.6     # demo value\n", "      mu_kinetic: 0\n"},
		{"  no_trip: true\n", "  no_trip: false\n"},
		{"physics:\n", "physics:\n  fall_hip_height_m: 0\n"},
		{"actuators:\n", "actuators:\n  lag_s: 0\n"},
		// Required fields that may be zero: left out, the loader refuses
		// the file.
		{"  hip_mass_kg: 10         # demo value (plant.DemoParams)\n", "  hip_mass_kg: 0\n"},
		{"    mass_kg: 15           # demo value\n", "    mass_kg: 0\n"},
	} {
		if !strings.Contains(s, r.old) {
			t.Fatalf("level-demo no longer has %q, which this test edits", r.old)
		}
		s = strings.Replace(s, r.old, r.new, 1)
	}
	s += "sensors:\n  encoder_counts_per_rev: 0\n  contact_threshold_n: 0\n  seed: 0\n  angle_noise_rad: 0\n"
	base, err := scenarios.Parse("zeros.yaml", []byte(s))
	if err != nil {
		t.Fatal(err)
	}
	return base
}

// explicitZeros are the fields zerosScenario sets to zero (or false), each
// read from a scenario.
var explicitZeros = []struct {
	field string
	get   func(*scenarios.Scenario) any
}{
	{"sensors.encoder_counts_per_rev", func(s *scenarios.Scenario) any { return s.Sensors.EncoderCountsPerRev }},
	{"sensors.contact_threshold_n", func(s *scenarios.Scenario) any { return s.Sensors.ContactThresholdN }},
	{"sensors.seed", func(s *scenarios.Scenario) any { return s.Sensors.Seed }},
	{"terrain.start_m", func(s *scenarios.Scenario) any { return s.Terrain.StartM }},
	{"terrain.segments[0].mu_kinetic", func(s *scenarios.Scenario) any { return s.Terrain.Segments[0].MuKinetic }},
	{"pass.no_trip", func(s *scenarios.Scenario) any { return *s.Pass.NoTrip }},
	{"physics.fall_hip_height_m", func(s *scenarios.Scenario) any { return s.Physics.FallHipHeightM }},
	{"actuators.lag_s", func(s *scenarios.Scenario) any { return s.Actuators.LagS }},
	{"plant.hip_mass_kg", func(s *scenarios.Scenario) any { return s.Plant.HipMassKG }},
	{"plant.torso.mass_kg", func(s *scenarios.Scenario) any { return s.Plant.Torso.MassKG }},
}

func TestEveryExplicitZeroSurvivesIntoEveryVariant(t *testing.T) {
	base := zerosScenario(t)
	for _, z := range explicitZeros {
		if v := reflect.ValueOf(z.get(base)); !v.IsZero() {
			t.Fatalf("the loader did not keep %s = 0 (got %v): the test scenario is wrong", z.field, v)
		}
	}
	// The loader's defaults for these fields are not zero: a variant that
	// fell back to them would show it.
	def, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	if def.Sensors.EncoderCountsPerRev == 0 || def.Sensors.ContactThresholdN == 0 || def.Sensors.Seed == 0 || !*def.Pass.NoTrip {
		t.Fatal("the defaults this test relies on to be non-zero are zero")
	}
	variants, err := Preflight{}.Variants(base)
	if err != nil {
		t.Fatal(err)
	}
	for _, v := range variants {
		// Twice: the variant as it runs, and the variant as its recorded
		// text loads back (what a replay of its run folder rebuilds).
		again, err := scenarios.Parse("again", v.Text)
		if err != nil {
			t.Fatalf("%s: recorded text does not load: %v\n%s", v.Name, err, v.Text)
		}
		for _, s := range []*scenarios.Scenario{v, again} {
			for _, z := range explicitZeros {
				if got := reflect.ValueOf(z.get(s)); !got.IsZero() {
					t.Errorf("%s: %s = %v, want the explicit zero of the base", v.Name, z.field, got)
				}
			}
		}
	}
}

// TestVariantTextLoadsBackIntoTheVariant: for every built-in scenario and
// every check of the battery, the text a variant records loads back into a
// scenario equal to the variant field by field (so a replay of the run
// folder rebuilds what ran), names its base and change, and holds the
// base's text.
func TestVariantTextLoadsBackIntoTheVariant(t *testing.T) {
	bases := []*scenarios.Scenario{zerosScenario(t)}
	for _, e := range scenarios.Library() {
		b, err := scenarios.LoadBuiltin(e.Name)
		if err != nil {
			t.Fatal(err)
		}
		bases = append(bases, b)
	}
	for _, base := range bases {
		for _, c := range Battery() {
			v, err := Derive(base, base.Name+"-"+c.Name, c.What, c.Change)
			if err != nil {
				t.Errorf("%s/%s: %v", base.Name, c.Name, err)
				continue
			}
			again, err := scenarios.Parse(v.File, v.Text)
			if err != nil {
				t.Errorf("%s/%s: recorded text does not load: %v\n%s", base.Name, c.Name, err, v.Text)
				continue
			}
			again.File, again.Text = v.File, v.Text
			if d := scenarios.Differences(v, again); len(d) > 0 {
				t.Errorf("%s/%s: recorded text differs from the variant at %v", base.Name, c.Name, d)
			}
			if !reflect.DeepEqual(normalised(v), normalised(again)) {
				t.Errorf("%s/%s: recorded text differs from the variant (reflect.DeepEqual)", base.Name, c.Name)
			}
			text := string(v.Text)
			for _, want := range []string{"scenario " + base.Name, scenarios.Hash(base.Text), c.What, "# | name: " + base.Name} {
				if !strings.Contains(text, want) {
					t.Errorf("%s/%s: recorded text lacks %q", base.Name, c.Name, want)
				}
			}
		}
	}
}

// normalised returns a copy of s in which empty slices and maps are nil,
// so reflect.DeepEqual (an independent comparison, not this package's
// differences) treats "given empty" and "left out" alike.
func normalised(s *scenarios.Scenario) *scenarios.Scenario {
	c := Copy(s)
	var walk func(v reflect.Value)
	walk = func(v reflect.Value) {
		switch v.Kind() {
		case reflect.Pointer:
			if !v.IsNil() {
				walk(v.Elem())
			}
		case reflect.Struct:
			for i := 0; i < v.NumField(); i++ {
				walk(v.Field(i))
			}
		case reflect.Slice, reflect.Map:
			if v.Len() == 0 {
				v.Set(reflect.Zero(v.Type()))
				return
			}
			if v.Kind() == reflect.Slice {
				for i := 0; i < v.Len(); i++ {
					walk(v.Index(i))
				}
			}
		}
	}
	walk(reflect.ValueOf(c).Elem())
	return c
}

func TestVariantChangesOnlyWhatItSays(t *testing.T) {
	base, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	v, err := Derive(base, "half-friction", "μ halved", func(s *scenarios.Scenario) {
		for i := range s.Terrain.Segments {
			s.Terrain.Segments[i].MuStatic *= 0.5
			s.Terrain.Segments[i].MuKinetic *= 0.5
		}
	})
	if err != nil {
		t.Fatal(err)
	}
	if got, want := v.Terrain.Segments[0].MuStatic, 0.4; got != want {
		t.Errorf("variant μ_s = %v, want %v", got, want)
	}
	if base.Terrain.Segments[0].MuStatic != 0.8 || base.Terrain.Segments[0].MuKinetic != 0.6 {
		t.Errorf("the variant changed the base: μ_s %v, μ_k %v", base.Terrain.Segments[0].MuStatic, base.Terrain.Segments[0].MuKinetic)
	}
	d := scenarios.Differences(base, v)
	want := []string{"name", "terrain.segments[0].mu_static", "terrain.segments[0].mu_kinetic"}
	if !reflect.DeepEqual(d, want) {
		t.Errorf("the variant differs from the base at %v, want %v", d, want)
	}
	if _, err := Derive(base, "broken", "foot too big", func(s *scenarios.Scenario) { s.Plant.Legs.FootRadiusM = 5 }); err == nil || !strings.Contains(err.Error(), "foot_radius_m") {
		t.Errorf("a variant with a foot radius beyond the leg length: err %v, want one naming foot_radius_m", err)
	}
}

package record

import (
	"encoding/json"
	"os"
	"path/filepath"
	"reflect"
	"testing"

	"gaitrig/plant"
)

// fillDistinct sets every number of v (walking structs, arrays, slices and
// pointers) to a different value and every bool to true, so a conversion
// that drops or swaps a field cannot come back equal.
func fillDistinct(v reflect.Value, next *float64) {
	switch v.Kind() {
	case reflect.Float64:
		*next += 1.25
		v.SetFloat(*next)
	case reflect.Bool:
		v.SetBool(true)
	case reflect.Struct:
		for i := 0; i < v.NumField(); i++ {
			fillDistinct(v.Field(i), next)
		}
	case reflect.Array:
		for i := 0; i < v.Len(); i++ {
			fillDistinct(v.Index(i), next)
		}
	case reflect.Slice:
		v.Set(reflect.MakeSlice(v.Type(), 3, 3))
		for i := 0; i < v.Len(); i++ {
			fillDistinct(v.Index(i), next)
		}
	case reflect.Pointer:
		v.Set(reflect.New(v.Type().Elem()))
		fillDistinct(v.Elem(), next)
	default:
		panic("fillDistinct: add a case for " + v.Kind().String())
	}
}

// TestPlantOfRoundTrip: every field of plant.Params survives PlantOf, the
// manifest file and Params, bit for bit. A field added to plant.Params and
// not to the manifest schema makes this fail.
func TestPlantOfRoundTrip(t *testing.T) {
	var p plant.Params
	next := 0.0
	fillDistinct(reflect.ValueOf(&p).Elem(), &next)
	if back := PlantOf(p).Params(); !reflect.DeepEqual(back, p) {
		t.Fatalf("PlantOf then Params:\n got %+v\nwant %+v", back, p)
	}
	compass := plant.DemoParams()
	compass.Torso = nil
	for _, q := range []plant.Params{plant.DemoParams(), compass} {
		dir := filepath.Join(t.TempDir(), "run")
		m := testManifest()
		m.Plant = PlantOf(q)
		w, err := Create(dir, m)
		if err != nil {
			t.Fatal(err)
		}
		if err := w.Close(Summary{Outcome: Pass}); err != nil {
			t.Fatal(err)
		}
		run, err := Open(dir)
		if err != nil {
			t.Fatal(err)
		}
		if back := run.Manifest.Plant.Params(); !reflect.DeepEqual(back, q) {
			t.Errorf("through manifest.json:\n got %+v\nwant %+v", back, q)
		}
	}
}

// TestManifestKeys checks the written manifest's keys by name: the schema
// version and the plant block in scenario units.
func TestManifestKeys(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "run")
	m := testManifest()
	m.Plant = PlantOf(plant.DemoParams())
	w, err := Create(dir, m)
	if err != nil {
		t.Fatal(err)
	}
	w.Close(Summary{Outcome: Pass})
	data, err := os.ReadFile(filepath.Join(dir, ManifestFile))
	if err != nil {
		t.Fatal(err)
	}
	var raw struct {
		SchemaVersion int `json:"schema_version"`
		Plant         struct {
			HipMassKG *float64 `json:"hip_mass_kg"`
			Gravity   *float64 `json:"gravity_mps2"`
			Legs      []struct {
				LengthM     *float64 `json:"length_m"`
				FootRadiusM *float64 `json:"foot_radius_m"`
			} `json:"legs"`
			Torso *struct {
				MassKG *float64 `json:"mass_kg"`
			} `json:"torso"`
			Terrain struct {
				StartM   []float64 `json:"start_m"`
				Segments []struct {
					SlopeRad  *float64 `json:"slope_rad"`
					MuStatic  *float64 `json:"mu_static"`
					MuKinetic *float64 `json:"mu_kinetic"`
				} `json:"segments"`
			} `json:"terrain"`
		} `json:"plant"`
	}
	if err := json.Unmarshal(data, &raw); err != nil {
		t.Fatal(err)
	}
	p := raw.Plant
	if raw.SchemaVersion != SchemaVersion || p.HipMassKG == nil || *p.HipMassKG != 10 || p.Gravity == nil ||
		len(p.Legs) != 2 || p.Legs[1].LengthM == nil || *p.Legs[1].LengthM != 0.9 || p.Legs[0].FootRadiusM == nil ||
		p.Torso == nil || p.Torso.MassKG == nil || *p.Torso.MassKG != 15 || len(p.Terrain.StartM) != 2 ||
		len(p.Terrain.Segments) != 1 || p.Terrain.Segments[0].MuStatic == nil || *p.Terrain.Segments[0].MuStatic != 0.8 ||
		p.Terrain.Segments[0].SlopeRad == nil || p.Terrain.Segments[0].MuKinetic == nil {
		t.Errorf("manifest keys:\n%s", data)
	}
}

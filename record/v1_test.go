package record

import (
	"encoding/csv"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// v1Folder is a real run folder of schema 1, cut to 250 telemetry rows.
const v1Folder = "testdata/v1-level-demo"

// copyFolder copies a flat folder into a fresh temporary one, so a test can
// write into it (the Parquet export does).
func copyFolder(t *testing.T, src string) string {
	t.Helper()
	dst := filepath.Join(t.TempDir(), filepath.Base(src))
	if err := os.MkdirAll(dst, 0o755); err != nil {
		t.Fatal(err)
	}
	entries, err := os.ReadDir(src)
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range entries {
		data, err := os.ReadFile(filepath.Join(src, e.Name()))
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dst, e.Name()), data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	return dst
}

// v1Rename is the schema 1 → schema 2 column renaming of a torso walker,
// written out by hand (independently of the V1Name entries of the table).
var v1Rename = map[string]string{
	"q0": "x_hip_m", "q1": "y_hip_m", "q2": "theta_left_rad", "q3": "theta_right_rad", "q4": "theta_torso_rad",
	"v0": "vx_hip_mps", "v1": "vy_hip_mps", "v2": "omega_left_radps", "v3": "omega_right_radps", "v4": "omega_torso_radps",
	"angle_hip_left": "angle_hip_left_rad", "angle_hip_right": "angle_hip_right_rad",
	"rate_hip_left": "rate_hip_left_radps", "rate_hip_right": "rate_hip_right_radps",
	"cmd_hip_left": "tau_cmd_hip_left_nm", "cmd_hip_right": "tau_cmd_hip_right_nm",
	"torque_hip_left": "tau_applied_hip_left_nm", "torque_hip_right": "tau_applied_hip_right_nm",
	"left_mode": "mode_left", "left_normal_n": "normal_left_n", "left_tangential_n": "tangential_left_n",
	"left_utilization": "utilization_left", "left_cop_m": "cop_left_m", "left_contact_x_m": "contact_x_left_m",
	"right_mode": "mode_right", "right_normal_n": "normal_right_n", "right_tangential_n": "tangential_right_n",
	"right_utilization": "utilization_right", "right_cop_m": "cop_right_m", "right_contact_x_m": "contact_x_right_m",
	"kinetic_j": "energy_kinetic_j", "potential_j": "energy_potential_j",
	"tick": "tick", "t_s": "t_s", "wall_s": "wall_s", "push_x_n": "push_x_n", "push_y_n": "push_y_n",
	"latency_us": "latency_us", "fresh": "fresh", "stance": "stance",
}

// TestOpenSchema1Folder reads a real schema 1 folder: the manifest's
// untagged plant block becomes the typed Plant, and every telemetry value
// reads back bit for bit under its new name (checked against the file
// parsed with encoding/csv and the hand-written renaming above).
func TestOpenSchema1Folder(t *testing.T) {
	run, err := Open(v1Folder)
	if err != nil {
		t.Fatal(err)
	}
	m := run.Manifest
	if m.SchemaVersion != 1 || m.Scenario != "level-demo" || m.NumQ != 5 || len(m.JointNames) != 2 {
		t.Fatalf("manifest: schema %d scenario %q num_q %d joints %v", m.SchemaVersion, m.Scenario, m.NumQ, m.JointNames)
	}
	// The values of the scenario file builtin:level-demo at that commit.
	want := Plant{HipMassKG: 10, GravityMPS2: 9.81,
		Legs:    [2]Leg{{LengthM: 0.9, MassKG: 3, COMM: 0.35, InertiaKGM2: 0.15, FootRadiusM: 0.27}, {LengthM: 0.9, MassKG: 3, COMM: 0.35, InertiaKGM2: 0.15, FootRadiusM: 0.27}},
		Torso:   &Torso{MassKG: 15, COMM: 0.3, InertiaKGM2: 0.6},
		Terrain: Terrain{StartM: [2]float64{-5, 0}, Segments: []TerrainSegment{{LengthM: 200, SlopeRad: 0, MuStatic: 0.8, MuKinetic: 0.6}}}}
	if m.Plant == nil || m.Plant.HipMassKG != want.HipMassKG || m.Plant.Legs != want.Legs || *m.Plant.Torso != *want.Torso ||
		m.Plant.Terrain.StartM != want.Terrain.StartM || len(m.Plant.Terrain.Segments) != 1 || m.Plant.Terrain.Segments[0] != want.Terrain.Segments[0] || m.Plant.GravityMPS2 != 9.81 {
		t.Fatalf("plant %+v", m.Plant)
	}
	if len(run.Steps) != 30 || run.Summary == nil || run.Summary.Outcome != Pass {
		t.Fatalf("steps %d summary %+v", len(run.Steps), run.Summary)
	}

	ticks, trunc, err := run.AllTicks()
	if err != nil || trunc || len(ticks) != 250 {
		t.Fatalf("AllTicks: %d rows, truncated %v, %v", len(ticks), trunc, err)
	}
	f, err := os.Open(filepath.Join(v1Folder, TelemetryFile))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	header := rows[0]
	if len(header) != len(v1Rename) {
		t.Fatalf("the fixture has %d columns, the renaming knows %d", len(header), len(v1Rename))
	}
	checked := 0
	for k, tk := range ticks {
		names, vals := expectedRow(&tk, 5, m.JointNames)
		byName := map[string]float64{}
		for i, n := range names {
			byName[n] = vals[i]
		}
		if e := byName["energy_total_j"]; e != tk.Kinetic+tk.Potential {
			t.Fatalf("row %d: energy_total_j %v", k, e)
		}
		for i, old := range header {
			raw, err := strconv.ParseFloat(rows[1+k][i], 64)
			if err != nil {
				t.Fatalf("row %d %s: %v", k, old, err)
			}
			got, ok := byName[v1Rename[old]]
			if !ok {
				t.Fatalf("column %s (now %q) not read", old, v1Rename[old])
			}
			if !(math.Float64bits(got) == math.Float64bits(raw) || math.IsNaN(got) && math.IsNaN(raw)) {
				t.Fatalf("row %d column %s → %s: read %v, file has %v", k, old, v1Rename[old], got, raw)
			}
			checked++
		}
	}
	if checked != 250*len(header) {
		t.Errorf("checked %d values", checked)
	}

	// The Parquet export of an old folder has the current names and the
	// derived column.
	dir := copyFolder(t, v1Folder)
	if n, err := ExportParquet(dir); err != nil || n != 250 {
		t.Fatalf("ExportParquet: %d rows, %v", n, err)
	}
}

// TestTableKnowsSchema1Names checks the table's V1Name entries against the
// hand-written renaming for a torso walker and against the header a
// schema 1 folder really has.
func TestTableKnowsSchema1Names(t *testing.T) {
	cols := TickColumns(5, []string{"hip_left", "hip_right"})
	n := 0
	for _, c := range cols {
		if c.V1Name == "" {
			// Columns schema 1 did not have: the derived total energy,
			// the slip flags and the treadmill's belt columns.
			if c.Name != "energy_total_j" && c.Name != "slip_left" && c.Name != "slip_right" && c.Name != "belt_speed_mps" && c.Name != "belt_position_m" {
				t.Errorf("column %s has no schema 1 name", c.Name)
			}
			continue
		}
		n++
		if v1Rename[c.V1Name] != c.Name {
			t.Errorf("column %s: schema 1 name %s, the renaming says %s becomes %s", c.Name, c.V1Name, c.V1Name, v1Rename[c.V1Name])
		}
	}
	data, err := os.ReadFile(filepath.Join(v1Folder, TelemetryFile))
	if err != nil {
		t.Fatal(err)
	}
	head, _, _ := strings.Cut(string(data), "\n")
	if got := tickFields(5, []string{"hip_left", "hip_right"}).names(1); strings.Join(got, ",") != head {
		t.Errorf("schema 1 header\n got %s\nfile %s", strings.Join(got, ","), head)
	}
	if n != len(v1Rename) {
		t.Errorf("%d columns have a schema 1 name, the fixture has %d", n, len(v1Rename))
	}
}

// TestManifestSchemaErrors: a manifest from a newer gaitrig, one with an
// unknown schema and one that is no run manifest at all each give an error
// that says so and names the file.
func TestManifestSchemaErrors(t *testing.T) {
	tests := []struct {
		name, manifest, want string
	}{
		{"newer", `{"schema_version": 3, "num_q": 4}`, "recorded by a newer version of gaitrig (run folder schema 3)"},
		{"zero", `{"schema_version": 0}`, "schema_version 0 is not a run folder schema"},
		{"no schema", `{"scenario": "x"}`, "not a gaitrig run folder manifest"},
		{"format 7", `{"format": 7}`, "not a gaitrig run folder manifest"},
		{"not JSON", `{"schema_version":`, "manifest.json"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			dir := copyFolder(t, v1Folder)
			if err := os.WriteFile(filepath.Join(dir, ManifestFile), []byte(tc.manifest), 0o644); err != nil {
				t.Fatal(err)
			}
			_, err := Open(dir)
			if err == nil || !strings.Contains(err.Error(), tc.want) || !strings.Contains(err.Error(), ManifestFile) {
				t.Fatalf("got %v, want an error naming %s and saying %q", err, ManifestFile, tc.want)
			}
		})
	}
}

// A schema 1 manifest with a telemetry header of the current names (a
// folder whose files disagree) is refused at the header, not misread.
func TestSchema1ManifestWithNewHeader(t *testing.T) {
	dir := copyFolder(t, v1Folder)
	path := filepath.Join(dir, TelemetryFile)
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	_, rest, _ := strings.Cut(string(data), "\n")
	head := strings.Join(columnNames(TickColumns(5, []string{"hip_left", "hip_right"})), ",")
	if err := os.WriteFile(path, []byte(head+"\n"+rest), 0o644); err != nil {
		t.Fatal(err)
	}
	run, err := Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := run.Ticks(); err == nil || !strings.Contains(err.Error(), "header does not match") {
		t.Fatalf("got %v, want a header mismatch", err)
	}
}

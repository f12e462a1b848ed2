package report

import (
	"math"
	"path/filepath"
	"strings"
	"testing"

	"gaitrig/plant"
	"gaitrig/record"
)

func TestTerrainOf(t *testing.T) {
	seg := func(l, slope, mu float64) record.TerrainSegment {
		return record.TerrainSegment{LengthM: l, SlopeRad: slope, MuStatic: mu, MuKinetic: mu / 2}
	}
	tests := []struct {
		name string
		p    *record.Plant
		want []terrainSeg
	}{
		{name: "no plant"},
		{name: "no segments", p: &record.Plant{HipMassKG: 10}},
		{name: "segment with zero length", p: &record.Plant{Terrain: record.Terrain{Segments: []record.TerrainSegment{seg(0, 0, 0.5)}}}},
		{name: "segment with NaN length", p: &record.Plant{Terrain: record.Terrain{Segments: []record.TerrainSegment{seg(math.NaN(), 0, 0.5)}}}},
		{
			name: "flat then uphill",
			p: &record.Plant{Terrain: record.Terrain{StartM: [2]float64{1, 0},
				Segments: []record.TerrainSegment{seg(2, 0, 0.7), seg(2, 0.5235987755982988, 0.2)}}},
			// cos(30°) = √3/2, so the second segment spans √3 m of x.
			want: []terrainSeg{{x0: 1, x1: 3, slope: 0, muS: 0.7}, {x0: 3, x1: 3 + math.Sqrt(3), slope: math.Pi / 6, muS: 0.2}},
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got := terrainOf(tc.p)
			if len(got) != len(tc.want) {
				t.Fatalf("got %d segments %+v, want %+v", len(got), got, tc.want)
			}
			for i := range got {
				g, w := got[i], tc.want[i]
				if math.Abs(g.x0-w.x0) > 1e-12 || math.Abs(g.x1-w.x1) > 1e-12 || math.Abs(g.slope-w.slope) > 1e-12 || g.muS != w.muS {
					t.Errorf("segment %d = %+v, want %+v", i, g, w)
				}
			}
		})
	}
}

func TestSegmentAt(t *testing.T) {
	segs := []terrainSeg{{x0: 0, x1: 2, muS: 0.6}, {x0: 2, x1: 3, muS: 0.1}, {x0: 3, x1: 9, muS: 0.5}}
	tests := []struct {
		x      float64
		wantMu float64
		ok     bool
	}{
		{-5, 0.6, true}, // before the start: the first segment continues backward
		{0, 0.6, true},
		{1.999, 0.6, true},
		{2, 0.1, true},
		{2.5, 0.1, true},
		{3, 0.5, true},
		{100, 0.5, true}, // past the end: the last segment continues
		{math.NaN(), 0, false},
	}
	for _, tc := range tests {
		s, ok := segmentAt(segs, tc.x)
		if ok != tc.ok || (ok && s.muS != tc.wantMu) {
			t.Errorf("segmentAt(%g) = %+v, %v; want μs %g, %v", tc.x, s, ok, tc.wantMu, tc.ok)
		}
	}
	if _, ok := segmentAt(nil, 1); ok {
		t.Error("segmentAt on no terrain said ok")
	}
}

// TestFrictionEnvelopeSource checks both ways of finding μs per tick give
// the friction the synthetic data was made with: from the terrain under
// the contact point, and, with no terrain in the manifest, back from the
// recorded utilization.
func TestFrictionEnvelopeSource(t *testing.T) {
	r := makeSynthRun(synthOpts{durationS: 6, hz: 500, patchMu: 0.15})
	noTerrain := r.m
	noTerrain.Plant = nil
	tests := []struct {
		name     string
		m        *record.Manifest
		wantNote string
	}{
		{"terrain in manifest", &r.m, "from the manifest's terrain"},
		{"no terrain: recovered from utilization", &noTerrain, "recovered from the recorded utilization"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			v := viewOf(tc.m, &sliceTicks{ticks: r.ticks}, r.steps, r.events, &r.sum)
			if !strings.Contains(strings.Join(v.Notes, " "), tc.wantNote) {
				t.Errorf("notes %q lack %q", v.Notes, tc.wantNote)
			}
			checked, onPatch := 0, 0
			for i, tk := range r.ticks {
				st := tk.Stance
				f := tk.Feet[st]
				want := synthMuS
				if f.ContactX >= synthPatch0 && f.ContactX < synthPatch1 {
					want = 0.15
					onPatch++
				}
				got := v.feet[st].mu[i]
				if math.IsNaN(got) {
					if tc.m.Plant != nil {
						t.Fatalf("tick %d: no μs for the loaded stance foot", i)
					}
					continue // no sideways force at this instant
				}
				if math.Abs(got-want) > 1e-9 {
					t.Fatalf("tick %d: μs %g, want %g", i, got, want)
				}
				if !math.IsNaN(v.feet[1-st].mu[i]) {
					t.Fatalf("tick %d: swing foot has a friction cone", i)
				}
				checked++
			}
			if checked < len(r.ticks)/2 || onPatch == 0 {
				t.Errorf("checked %d of %d ticks (%d on the patch)", checked, len(r.ticks), onPatch)
			}
		})
	}
}

// TestPlantFromRunFolder reads the terrain and foot radii of plant.Params
// recorded the way the hil loop fills Manifest.Plant (record.PlantOf) and
// read back from manifest.json, so the report follows the real format
// rather than one of its own making. (Only this test imports plant; the
// report itself reads the plant through record alone.)
func TestPlantFromRunFolder(t *testing.T) {
	p := plant.Params{
		HipMass: 10,
		Legs: [2]plant.Leg{
			{Length: 1, Mass: 2, COMDist: 0.5, Inertia: 0.1, FootRadius: 0.3},
			{Length: 1, Mass: 2, COMDist: 0.5, Inertia: 0.1, FootRadius: 0.25},
		},
		Gravity: 9.81,
		Terrain: plant.Terrain{Start: [2]float64{-1, 0}, Segments: []plant.Segment{
			{Length: 3, Slope: 0, MuStatic: 0.8, MuKinetic: 0.6},
			{Length: 2, Slope: -0.1, MuStatic: 0.2, MuKinetic: 0.15},
		}},
	}
	dir := filepath.Join(t.TempDir(), "run")
	w, err := record.Create(dir, record.Manifest{NumQ: 4, JointNames: []string{"hip"}, Plant: record.PlantOf(p)})
	if err != nil {
		t.Fatal(err)
	}
	if err := w.Close(record.Summary{Outcome: record.Pass}); err != nil {
		t.Fatal(err)
	}
	run, err := record.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	segs := terrainOf(run.Manifest.Plant)
	want := []terrainSeg{{x0: -1, x1: 2, slope: 0, muS: 0.8}, {x0: 2, x1: 2 + 2*math.Cos(-0.1), slope: -0.1, muS: 0.2}}
	if len(segs) != len(want) {
		t.Fatalf("got %+v, want %+v", segs, want)
	}
	for i := range want {
		g, w := segs[i], want[i]
		if math.Abs(g.x0-w.x0) > 1e-12 || math.Abs(g.x1-w.x1) > 1e-12 || g.slope != w.slope || g.muS != w.muS {
			t.Errorf("segment %d = %+v, want %+v", i, g, w)
		}
	}
	if r := footRadiiOf(run.Manifest.Plant); r != [2]float64{0.3, 0.25} {
		t.Errorf("foot radii %v, want [0.3 0.25]", r)
	}
}

// TestSchema1RunFolder renders the report of a real run folder of schema
// 1 (record's fixture): the terrain comes from its old plant block and the
// joint plots from its old column names.
func TestSchema1RunFolder(t *testing.T) {
	run, err := record.Open(filepath.Join("..", "record", "testdata", "v1-level-demo"))
	if err != nil {
		t.Fatal(err)
	}
	if run.Manifest.SchemaVersion != 1 {
		t.Fatalf("fixture has schema %d, want 1", run.Manifest.SchemaVersion)
	}
	tr, err := run.Ticks()
	if err != nil {
		t.Fatal(err)
	}
	defer tr.Close()
	v := viewOf(&run.Manifest, tr, run.Steps, run.Events, run.Summary)
	if err := tr.Err(); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(strings.Join(v.Notes, " "), "from the manifest's terrain") {
		t.Errorf("notes %q: the terrain of the old plant block was not used", v.Notes)
	}
	if len(v.t) != 250 || len(v.joints) != 2 || v.joints[0].name != "hip_left" || len(v.joints[1].applied) != 250 {
		t.Fatalf("view: %d ticks, joints %d", len(v.t), len(v.joints))
	}
	if r := footRadiiOf(run.Manifest.Plant); r != [2]float64{0.27, 0.27} {
		t.Errorf("foot radii %v, want the level-demo's 0.27 m", r)
	}
	var b strings.Builder
	if err := Render(&b, run); err != nil || !strings.Contains(b.String(), "<svg") {
		t.Fatalf("render: %v", err)
	}
}

package record

import (
	"encoding/json"
	"fmt"
	"time"

	"gaitrig/plant"
)

// SchemaVersion is the run-folder schema written by this package: the
// manifest layout and the telemetry column names. Schema 1 (manifests with
// "format": 1 and no schema_version) had the plant block as untagged Go
// field names and the columns q0…, v0…, angle_<joint>, cmd_<joint>, …;
// Open still reads it (see readManifest) and refuses schemas newer than
// this one.
const SchemaVersion = 2

// Greeting is the firmware's self-description as received on the link.
type Greeting struct {
	// Name is the firmware's name.
	Name string `json:"name"`
	// Build is the firmware's build identifier.
	Build string `json:"build"`
	// Protocol is the protocol version the firmware speaks.
	Protocol int `json:"protocol"`
	// Actuators is the number of torques the firmware sends.
	Actuators int `json:"actuators"`
}

// Manifest describes a run. It is written by Create and, if the greeting
// arrives later, rewritten by SetGreeting.
type Manifest struct {
	// SchemaVersion is the run-folder schema: 2 when written by this
	// build, 1 for an older folder read back.
	SchemaVersion int `json:"schema_version"`
	// Scenario is the scenario's name.
	Scenario string `json:"scenario"`
	// ScenarioFile is where the scenario was loaded from (a path, or
	// builtin:NAME).
	ScenarioFile string `json:"scenario_file"`
	// ScenarioText is the exact text of the scenario file.
	ScenarioText string `json:"scenario_text"`
	// ScenarioHash is the hex SHA-256 of the scenario text.
	ScenarioHash string `json:"scenario_hash"`
	// Plant is the walker and its ground as the plant ran them (after
	// scenario defaults and per-leg overrides), in scenario units;
	// absent when not recorded.
	Plant *Plant `json:"plant,omitempty"`
	// Greeting is the firmware's greeting, empty until it is known.
	Greeting Greeting `json:"greeting"`
	// ToolVersion is the gaitrig version that made the run.
	ToolVersion string `json:"tool_version"`
	// Seed is the random seed of sensor noise and fault injection.
	Seed int64 `json:"seed"`
	// Clock is lockstep or wallclock.
	Clock string `json:"clock"`
	// TickHz is the control rate, ticks per second.
	TickHz float64 `json:"tick_hz"`
	// Link describes the controller link (for example builtin, serial
	// /dev/ttyUSB0 at 115200, mqtt embedded rig bench).
	Link string `json:"link"`
	// Host is the machine the run ran on.
	Host string `json:"host"`
	// StartTime is the wall-clock time the run started (RFC 3339). The
	// wall_s column counts from it.
	StartTime time.Time `json:"start_time"`
	// NumQ is the number of generalized coordinates: x_hip, y_hip, then
	// one absolute angle per link (left, right, torso). It sets the
	// coordinate and velocity columns and the length of the initial state.
	NumQ int `json:"num_q"`
	// JointNames are the walker's joints in order; the per-joint columns
	// carry these names.
	JointNames []string `json:"joint_names"`
	// FootModes are the words for the contact mode codes of the mode_left
	// and mode_right columns, indexed by code.
	FootModes []string `json:"foot_modes"`
	// InitialQ is the exact initial generalized coordinates, in the order
	// of the x_hip_m, y_hip_m, theta_… columns.
	InitialQ []float64 `json:"initial_q"`
	// InitialV is the exact initial generalized velocity, in the order of
	// the vx_hip_mps, vy_hip_mps, omega_… columns.
	InitialV []float64 `json:"initial_v"`
	// Columns is the telemetry header, in file order; Create fills it in
	// from the coordinates and joints.
	Columns []string `json:"columns"`
}

// Plant is the manifest's record of the walker: plant.Params with the
// field names and units of the scenario schema. PlantOf makes one and
// Params turns it back, losing nothing.
type Plant struct {
	// HipMassKG is the point mass at the hip, kg.
	HipMassKG float64 `json:"hip_mass_kg"`
	// GravityMPS2 is the gravitational acceleration, m/s².
	GravityMPS2 float64 `json:"gravity_mps2"`
	// Legs are the left and the right leg, in that order.
	Legs [2]Leg `json:"legs"`
	// Torso is the torso link; absent for a compass walker.
	Torso *Torso `json:"torso,omitempty"`
	// Terrain is the ground.
	Terrain Terrain `json:"terrain"`
	// OneLeg is true for a single rolling body (plant checks only): the
	// second leg and the torso are then unused.
	OneLeg bool `json:"one_leg,omitempty"`
}

// Leg is one leg of the walker.
type Leg struct {
	// LengthM is the hip-to-foot length along the leg axis, m.
	LengthM float64 `json:"length_m"`
	// MassKG is the leg's mass, kg.
	MassKG float64 `json:"mass_kg"`
	// COMM is the distance of the leg's centre of mass from the hip along
	// the leg axis, m.
	COMM float64 `json:"com_m"`
	// InertiaKGM2 is the leg's moment of inertia about its centre of mass,
	// kg·m².
	InertiaKGM2 float64 `json:"inertia_kgm2"`
	// FootRadiusM is the radius of the foot arc, m (0: point foot).
	FootRadiusM float64 `json:"foot_radius_m"`
	// ArcOffsetM is the forward offset of the arc centre from the leg
	// axis, m.
	ArcOffsetM float64 `json:"arc_offset_m"`
	// Shank is the lower link of a leg with a knee (plant.Shank); absent
	// for a straight leg, whose fields above then describe the whole leg
	// (with a shank they describe the thigh, hip to knee).
	Shank *Shank `json:"shank,omitempty"`
}

// Shank is the lower link of a kneed leg, hinged at the thigh's end.
type Shank struct {
	// LengthM is the knee-to-foot length along the shank axis, m.
	LengthM float64 `json:"length_m"`
	// MassKG is the shank's mass, kg.
	MassKG float64 `json:"mass_kg"`
	// COMM is the distance of its centre of mass from the knee, m.
	COMM float64 `json:"com_m"`
	// InertiaKGM2 is its moment of inertia about its centre of mass, kg·m².
	InertiaKGM2 float64 `json:"inertia_kgm2"`
	// Actuated is true for a knee with a torque actuator.
	Actuated bool `json:"actuated,omitempty"`
	// Latch is true for a knee whose latch holds it at its stop.
	Latch bool `json:"latch,omitempty"`
	// StopRad is the knee angle at the knee's stop, rad; left out when 0
	// (the straight leg), so manifests written before it read the same.
	StopRad float64 `json:"stop_rad,omitempty"`
}

// Torso is the torso link, hinged at the hip and pointing up.
type Torso struct {
	// MassKG is the torso's mass, kg.
	MassKG float64 `json:"mass_kg"`
	// COMM is the distance of its centre of mass from the hip, m.
	COMM float64 `json:"com_m"`
	// InertiaKGM2 is its moment of inertia about its centre of mass, kg·m².
	InertiaKGM2 float64 `json:"inertia_kgm2"`
}

// Terrain is the ground: straight segments joined end to end.
type Terrain struct {
	// StartM is the first vertex (x, y), m. The first segment extends
	// backward from it and the last one forward without end.
	StartM [2]float64 `json:"start_m"`
	// Segments are the pieces of ground in order, each starting where the
	// one before ends.
	Segments []TerrainSegment `json:"segments"`
}

// TerrainSegment is one straight piece of ground.
type TerrainSegment struct {
	// LengthM is the segment's length along the ground, m.
	LengthM float64 `json:"length_m"`
	// SlopeRad is its slope, rad; positive is uphill going forward.
	SlopeRad float64 `json:"slope_rad"`
	// MuStatic is the static friction coefficient μ_s.
	MuStatic float64 `json:"mu_static"`
	// MuKinetic is the kinetic friction coefficient μ_k.
	MuKinetic float64 `json:"mu_kinetic"`
	// Belt marks the treadmill belt segment (plant.Segment.Belt); left
	// out for fixed ground.
	Belt bool `json:"belt,omitempty"`
}

// PlantOf records the plant parameters p in the manifest's schema.
func PlantOf(p plant.Params) *Plant {
	out := &Plant{HipMassKG: p.HipMass, GravityMPS2: p.Gravity, OneLeg: p.OneLeg,
		Terrain: Terrain{StartM: p.Terrain.Start}}
	for i, l := range p.Legs {
		out.Legs[i] = Leg{LengthM: l.Length, MassKG: l.Mass, COMM: l.COMDist, InertiaKGM2: l.Inertia,
			FootRadiusM: l.FootRadius, ArcOffsetM: l.ArcOffset}
		if s := l.Shank; s != nil {
			out.Legs[i].Shank = &Shank{LengthM: s.Length, MassKG: s.Mass, COMM: s.COMDist, InertiaKGM2: s.Inertia,
				Actuated: s.Actuated, Latch: s.Latch, StopRad: s.StopAngle}
		}
	}
	if t := p.Torso; t != nil {
		out.Torso = &Torso{MassKG: t.Mass, COMM: t.COMDist, InertiaKGM2: t.Inertia}
	}
	if p.Terrain.Segments != nil {
		out.Terrain.Segments = make([]TerrainSegment, len(p.Terrain.Segments))
	}
	for i, s := range p.Terrain.Segments {
		out.Terrain.Segments[i] = TerrainSegment{LengthM: s.Length, SlopeRad: s.Slope, MuStatic: s.MuStatic, MuKinetic: s.MuKinetic, Belt: s.Belt}
	}
	return out
}

// Params turns the record back into plant parameters: the inverse of
// PlantOf, exact to the bit.
func (p *Plant) Params() plant.Params {
	out := plant.Params{HipMass: p.HipMassKG, Gravity: p.GravityMPS2, OneLeg: p.OneLeg,
		Terrain: plant.Terrain{Start: p.Terrain.StartM}}
	for i, l := range p.Legs {
		out.Legs[i] = plant.Leg{Length: l.LengthM, Mass: l.MassKG, COMDist: l.COMM, Inertia: l.InertiaKGM2,
			FootRadius: l.FootRadiusM, ArcOffset: l.ArcOffsetM}
		if s := l.Shank; s != nil {
			out.Legs[i].Shank = &plant.Shank{Length: s.LengthM, Mass: s.MassKG, COMDist: s.COMM, Inertia: s.InertiaKGM2,
				Actuated: s.Actuated, Latch: s.Latch, StopAngle: s.StopRad}
		}
	}
	if t := p.Torso; t != nil {
		out.Torso = &plant.Torso{Mass: t.MassKG, COMDist: t.COMM, Inertia: t.InertiaKGM2}
	}
	if p.Terrain.Segments != nil {
		out.Terrain.Segments = make([]plant.Segment, len(p.Terrain.Segments))
	}
	for i, s := range p.Terrain.Segments {
		out.Terrain.Segments[i] = plant.Segment{Length: s.LengthM, Slope: s.SlopeRad, MuStatic: s.MuStatic, MuKinetic: s.MuKinetic, Belt: s.Belt}
	}
	return out
}

// schemaProbe reads only what tells the schemas apart.
type schemaProbe struct {
	SchemaVersion *int `json:"schema_version"`
	Format        *int `json:"format"` // schema 1 wrote "format": 1
}

// readManifest decodes a manifest of the current schema, or of schema 1
// converted to the current types (SchemaVersion stays 1 so a reader knows
// the telemetry header has the old names). path is for messages.
func readManifest(path string, data []byte) (Manifest, error) {
	var probe schemaProbe
	if err := json.Unmarshal(data, &probe); err != nil {
		return Manifest{}, fmt.Errorf("record: %s: %w", path, err)
	}
	var m Manifest
	switch {
	case probe.SchemaVersion != nil && *probe.SchemaVersion == SchemaVersion:
		if err := json.Unmarshal(data, &m); err != nil {
			return Manifest{}, fmt.Errorf("record: %s: %w", path, err)
		}
	case probe.SchemaVersion != nil && *probe.SchemaVersion > SchemaVersion:
		return Manifest{}, fmt.Errorf("record: %s: recorded by a newer version of gaitrig (run folder schema %d); this build reads schemas 1 to %d, update gaitrig to read it",
			path, *probe.SchemaVersion, SchemaVersion)
	case probe.SchemaVersion != nil:
		return Manifest{}, fmt.Errorf("record: %s: schema_version %d is not a run folder schema gaitrig ever wrote (1 to %d)", path, *probe.SchemaVersion, SchemaVersion)
	case probe.Format != nil && *probe.Format == 1:
		return readManifestV1(path, data)
	default:
		return Manifest{}, fmt.Errorf("record: %s: no schema_version (and no schema 1 \"format\": 1): not a gaitrig run folder manifest", path)
	}
	return m, nil
}

// manifestV1 is a schema 1 manifest: the same fields, with the plant block
// as json.Marshal wrote the untagged plant.Params of that time. The outer
// Plant field hides the embedded one from encoding/json.
type manifestV1 struct {
	Manifest
	Plant json.RawMessage `json:"plant"`
}

// plantV1 is the plant block of schema 1, frozen here so later changes to
// plant.Params cannot break reading old folders.
type plantV1 struct {
	HipMass float64
	Legs    [2]struct{ Length, Mass, COMDist, Inertia, FootRadius, ArcOffset float64 }
	Torso   *struct{ Mass, COMDist, Inertia float64 }
	Gravity float64
	Terrain struct {
		Start    [2]float64
		Segments []struct{ Length, Slope, MuStatic, MuKinetic float64 }
	}
	OneLeg bool
}

func readManifestV1(path string, data []byte) (Manifest, error) {
	var v1 manifestV1
	if err := json.Unmarshal(data, &v1); err != nil {
		return Manifest{}, fmt.Errorf("record: %s (run folder schema 1): %w", path, err)
	}
	m := v1.Manifest
	m.SchemaVersion = 1
	m.Plant = nil
	if len(v1.Plant) > 0 && string(v1.Plant) != "null" {
		var p plantV1
		if err := json.Unmarshal(v1.Plant, &p); err != nil {
			return Manifest{}, fmt.Errorf("record: %s (run folder schema 1): plant: %w", path, err)
		}
		q := &Plant{HipMassKG: p.HipMass, GravityMPS2: p.Gravity, OneLeg: p.OneLeg, Terrain: Terrain{StartM: p.Terrain.Start}}
		for i, l := range p.Legs {
			q.Legs[i] = Leg{LengthM: l.Length, MassKG: l.Mass, COMM: l.COMDist, InertiaKGM2: l.Inertia, FootRadiusM: l.FootRadius, ArcOffsetM: l.ArcOffset}
		}
		if t := p.Torso; t != nil {
			q.Torso = &Torso{MassKG: t.Mass, COMM: t.COMDist, InertiaKGM2: t.Inertia}
		}
		for _, s := range p.Terrain.Segments {
			q.Terrain.Segments = append(q.Terrain.Segments, TerrainSegment{LengthM: s.Length, SlopeRad: s.Slope, MuStatic: s.MuStatic, MuKinetic: s.MuKinetic})
		}
		m.Plant = q
	}
	return m, nil
}

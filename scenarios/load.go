package scenarios

import (
	"embed"
	"fmt"
	"os"
	"path"
	"sort"
	"strings"

	"gaitrig/plant"
)

// Parse decodes, fills in defaults and validates scenario text. file names
// the text in error messages. A malformed scenario gives an *Error listing
// every problem found with its line and field path.
func Parse(file string, text []byte) (*Scenario, error) {
	d := newDecoder(file)
	s := &Scenario{}
	d.parseYAML(text, s)
	if len(d.problems) == 0 || !syntaxOnly(d.problems) {
		d.applyDefaults(s)
		(&checker{d: d, s: s}).validate()
	}
	if len(d.problems) > 0 {
		sortProblems(d.problems)
		return nil, &Error{Problems: dedupe(d.problems)}
	}
	// A scenario the schema accepts must also make a valid plant: the plant
	// has the last word on its own parameters.
	if _, err := s.PlantParams(); err != nil {
		return nil, &Error{Problems: []Problem{{File: file, Line: d.present["plant"].line, Path: "plant", Msg: err.Error()}}}
	}
	s.File = file
	s.Text = append([]byte(nil), text...)
	return s, nil
}

// syntaxOnly reports whether the problems are a syntax error or an empty
// file, after which there is nothing to validate.
func syntaxOnly(ps []Problem) bool {
	for _, p := range ps {
		if p.Path == "" {
			return true
		}
	}
	return false
}

func dedupe(ps []Problem) []Problem {
	out := ps[:0]
	seen := map[string]bool{}
	for _, p := range ps {
		k := p.String()
		if !seen[k] {
			seen[k] = true
			out = append(out, p)
		}
	}
	return out
}

//go:generate go test -run ^TestReferencePage$ -update

// Load reads and parses a scenario file.
func Load(file string) (*Scenario, error) {
	text, err := os.ReadFile(file)
	if err != nil {
		return nil, fmt.Errorf("scenario: %w", err)
	}
	return Parse(file, text)
}

//go:embed library/*.yaml
var library embed.FS

// Entry is one built-in scenario.
type Entry struct {
	Name        string // the name LoadBuiltin takes, the file name without .yaml
	Description string // the scenario's description
	File        string // path inside the embedded library, for example library/level-demo.yaml
}

// Library lists the built-in scenarios, sorted by name. A built-in file that
// does not load is a bug caught by the tests; here it is listed with its
// error as description.
func Library() []Entry {
	files, _ := library.ReadDir("library")
	var out []Entry
	for _, f := range files {
		if !strings.HasSuffix(f.Name(), ".yaml") {
			continue
		}
		e := Entry{Name: strings.TrimSuffix(f.Name(), ".yaml"), File: path.Join("library", f.Name())}
		if s, err := LoadBuiltin(e.Name); err == nil {
			e.Description = s.Description
		} else {
			e.Description = "does not load: " + err.Error()
		}
		out = append(out, e)
	}
	sort.Slice(out, func(i, j int) bool { return out[i].Name < out[j].Name })
	return out
}

// BuiltinPrefix marks a built-in scenario's File, as in builtin:level-demo.
const BuiltinPrefix = "builtin:"

// LoadBuiltin loads a built-in scenario by name, for example "level-demo".
// Its File is "builtin:NAME".
func LoadBuiltin(name string) (*Scenario, error) {
	text, err := library.ReadFile(path.Join("library", name+".yaml"))
	if err != nil || strings.ContainsAny(name, "/\\") {
		var names []string
		files, _ := library.ReadDir("library")
		for _, f := range files {
			names = append(names, strings.TrimSuffix(f.Name(), ".yaml"))
		}
		return nil, fmt.Errorf("scenario: no built-in scenario %q; built-in: %s", name, strings.Join(names, ", "))
	}
	return Parse(BuiltinPrefix+name, text)
}

// Resolve loads what a user typed on the command line: a scenario file
// path, a built-in name such as level-demo, or builtin:NAME. A path that
// exists wins over a built-in of the same name.
func Resolve(arg string) (*Scenario, error) {
	if name, ok := strings.CutPrefix(arg, BuiltinPrefix); ok {
		return LoadBuiltin(name)
	}
	if _, err := os.Stat(arg); err == nil {
		return Load(arg)
	}
	if _, err := library.ReadFile(path.Join("library", arg+".yaml")); err == nil && !strings.ContainsAny(arg, "/\\") {
		return LoadBuiltin(arg)
	}
	var names []string
	for _, e := range Library() {
		names = append(names, e.Name)
	}
	return nil, fmt.Errorf("scenario: %s is neither a file nor a built-in scenario; built-in: %s", arg, strings.Join(names, ", "))
}

// BuiltinText returns the YAML text of a built-in scenario, for a user who
// wants a starting point of their own.
func BuiltinText(name string) ([]byte, error) {
	s, err := LoadBuiltin(name)
	if err != nil {
		return nil, err
	}
	return s.Text, nil
}

// Leg returns the effective parameters of leg i (0 left, 1 right): the
// shared leg with that side's overrides.
func (s *Scenario) Leg(i int) Leg {
	if i == 0 {
		return applyOverride(s.Plant.Legs.Leg, s.Plant.Legs.Left)
	}
	return applyOverride(s.Plant.Legs.Leg, s.Plant.Legs.Right)
}

// PlantParams converts the scenario's walker and terrain to plant
// parameters and has the plant validate them.
func (s *Scenario) PlantParams() (plant.Params, error) {
	p := plant.Params{
		HipMass: s.Plant.HipMassKG,
		Gravity: s.Plant.GravityMPS2,
		Terrain: plant.Terrain{Start: s.Terrain.StartM},
	}
	for i := range p.Legs {
		l := s.Leg(i)
		p.Legs[i] = plant.Leg{Length: l.LengthM, Mass: l.MassKG, COMDist: l.COMM, Inertia: l.InertiaKGM2,
			FootRadius: l.FootRadiusM, ArcOffset: l.ArcOffsetM}
	}
	if t := s.Plant.Torso; t != nil {
		p.Torso = &plant.Torso{Mass: t.MassKG, COMDist: t.COMM, Inertia: t.InertiaKGM2}
	}
	for _, g := range s.Terrain.Segments {
		p.Terrain.Segments = append(p.Terrain.Segments, plant.Segment{Length: g.LengthM, Slope: g.SlopeRad,
			MuStatic: g.MuStatic, MuKinetic: g.MuKinetic})
	}
	if err := p.Validate(); err != nil {
		return p, err
	}
	return p, nil
}

// PlantOptions converts the scenario's clock and physics settings to plant
// options.
func (s *Scenario) PlantOptions() plant.Options {
	return plant.Options{
		SubSteps:          s.Clock.Substeps,
		ContinueOnSlip:    s.Physics.OnSlip != PolicyStop,
		ContinueOnLiftOff: s.Physics.OnLiftOff != PolicyStop,
		IgnoreScuff:       s.Physics.IgnoreScuff,
		FallHipHeight:     s.Physics.FallHipHeightM,
		FallTorsoAngle:    s.Physics.FallTorsoAngleRad,
	}
}

// StanceLeg returns the initial stance leg as the plant's index: 0 left, 1
// right.
func (s *Scenario) StanceLeg() int {
	if s.Initial.Stance == "right" {
		return 1
	}
	return 0
}

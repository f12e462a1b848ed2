package scenarios

import (
	"bytes"
	"embed"
	"fmt"
	"io"
	"os"
	"path"
	"sort"
	"strings"
	"unicode/utf8"

	"gaitrig/plant"
)

// Limits on a scenario file, checked before the YAML parser sees the text:
// the parser's time and memory grow much faster than the text for deeply
// nested input (a 200 KB file of nested brackets took minutes and
// gigabytes), so such files are refused at once with a clear error. A real
// scenario is a few kilobytes and about five levels deep.
const (
	// MaxFileBytes is the largest scenario file accepted, 1 MiB.
	MaxFileBytes = 1 << 20
	// MaxNesting is the deepest nesting accepted: block levels (indentation
	// steps and "- " list entries) plus open [ and { brackets, counted line
	// by line before parsing, and the depth of values after aliases are
	// resolved.
	MaxNesting = 32
	// MaxFields is the most "name: value" pairs a file may hold. The
	// parser's time grows with the square of the fields in one block (on a
	// shared 2-core machine: 5 000 in 0.2 s, 20 000 in 2.3 s, 100 000 in
	// 97 s); a scenario has about a hundred, a long terrain three per
	// segment.
	MaxFields = 5000
)

// loadingNotes is the part of the scenario reference (docs/scenarios.md)
// about what the loader accepts beyond the fields: file limits, text
// encoding, numbers, and why a leg cannot be exactly massless.
func loadingNotes() string {
	return fmt.Sprintf("## Files the loader accepts\n\n"+
		"A scenario file is UTF-8 text (a byte-order mark at the start is allowed;\n"+
		"a UTF-16 file is refused with a one-line error). Before the YAML is\n"+
		"parsed, a file is refused at once when it is larger than %d bytes (1 MiB),\n"+
		"nests deeper than %d levels (indentation steps, `- ` list entries and\n"+
		"open `[`/`{` brackets together), or holds more than %d `name: value`\n"+
		"fields; a scenario is a few kilobytes, about five levels deep, with a\n"+
		"few hundred fields at most.\n\n"+
		"Numbers may be written in exponent notation without a decimal point\n"+
		"(`1e-9`, `1e1`, `-1e-2`); a number too large for a 64-bit float\n"+
		"(`1e400`) or one that would round to zero (`1e-400`) is an error.\n\n"+
		"The loader also places the walker as a run would (stance foot on the\n"+
		"ground, hip above it); an initial state that puts the swing foot into\n"+
		"the ground, or a slope too steep to stand on, is reported at\n"+
		"`initial.leg_angles_rad` or at the segment's `slope_rad`.\n\n"+
		"**No exactly massless leg.** A leg with `mass_kg: 0` and\n"+
		"`inertia_kgm2: 0` has no inertia about the hip, so the equations of\n"+
		"motion leave its swing undetermined (its angular acceleration is 0/0);\n"+
		"the plant refuses it. The point-foot model of the walking literature is\n"+
		"the limit of a leg mass going to zero, and the plant approaches it\n"+
		"instead of reaching it: put a tiny mass at the foot, for example\n"+
		"`mass_kg: 1e-8` with `com_m` equal to `length_m` and `inertia_kgm2: 0`\n"+
		"beside a 1 kg hip (a mass ratio of 1e-8; the plant's own checks use\n"+
		"1e-9, where the gait differs from the limit by about the mass ratio).\n\n",
		MaxFileBytes, MaxNesting, MaxFields)
}

// utf8BOM is the byte-order mark some editors put at the start of a UTF-8
// file; it carries no content.
var utf8BOM = []byte{0xEF, 0xBB, 0xBF}

// Parse decodes, fills in defaults and validates scenario text. file names
// the text in error messages. A malformed scenario gives an *Error listing
// every problem found with its line and field path. Text over MaxFileBytes,
// nested deeper than MaxNesting, or not UTF-8 is refused before parsing.
func Parse(file string, text []byte) (*Scenario, error) {
	if p, bad := precheck(file, text); bad {
		return nil, &Error{Problems: []Problem{p}}
	}
	d := newDecoder(file)
	s := &Scenario{}
	d.parseYAML(bytes.TrimPrefix(text, utf8BOM), s)
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
	p, err := s.PlantParams()
	if err != nil {
		return nil, &Error{Problems: []Problem{{File: file, Line: d.present["plant"].line, Path: "plant", Msg: err.Error()}}}
	}
	// And the walker must stand where the scenario puts it, or every
	// command would fail later without saying which field is wrong.
	if ps := (&checker{d: d, s: s}).stand(p); len(ps) > 0 {
		return nil, &Error{Problems: ps}
	}
	s.File = file
	s.Text = append([]byte(nil), text...)
	return s, nil
}

// precheck refuses text the YAML parser should never see: too large, not
// UTF-8 (a UTF-16 file would otherwise come back as kilobytes of
// unreadable "text"), or nested too deeply.
func precheck(file string, text []byte) (Problem, bool) {
	p := Problem{File: file, Line: 1}
	if len(text) > MaxFileBytes {
		p.Line = 0
		p.Msg = fmt.Sprintf("the file is %d bytes; a scenario file may be at most %d bytes (1 MiB)", len(text), MaxFileBytes)
		return p, true
	}
	switch {
	case bytes.HasPrefix(text, []byte{0xFF, 0xFE}) || bytes.HasPrefix(text, []byte{0xFE, 0xFF}):
		p.Msg = "the file is UTF-16 text (it starts with a UTF-16 byte-order mark); save it as UTF-8"
		return p, true
	case bytes.IndexByte(text, 0) >= 0:
		p.Line = 1 + bytes.Count(text[:bytes.IndexByte(text, 0)], []byte("\n"))
		p.Msg = "the file holds NUL bytes: it is UTF-16 or binary, not text; save it as UTF-8"
		return p, true
	case !utf8.Valid(text):
		bad := firstInvalidUTF8(text)
		p.Line = 1 + bytes.Count(text[:bad], []byte("\n"))
		p.Msg = fmt.Sprintf("byte 0x%02X is not UTF-8; save the file as UTF-8", text[bad])
		return p, true
	}
	sh := measure(bytes.TrimPrefix(text, utf8BOM))
	switch {
	case sh.depth > MaxNesting:
		p.Line = sh.depthLine
		p.Msg = fmt.Sprintf("nested more than %d levels deep; a scenario needs about five", MaxNesting)
		return p, true
	case sh.fields > MaxFields:
		p.Line = sh.fieldsLine
		p.Msg = fmt.Sprintf("more than %d fields (name: value pairs) by this line; a scenario needs a few hundred at most", MaxFields)
		return p, true
	}
	return p, false
}

func firstInvalidUTF8(b []byte) int {
	for i := 0; i < len(b); {
		r, n := utf8.DecodeRune(b[i:])
		if r == utf8.RuneError && n == 1 {
			return i
		}
		i += n
	}
	return 0
}

// shape is what measure found: the deepest nesting and its line, and the
// number of fields and the line where it passed MaxFields.
type shape struct {
	depth, depthLine   int
	fields, fieldsLine int
}

// measure estimates how deeply YAML text nests and how many fields it has,
// in one pass and without parsing. Depth, per line: the open indentation
// levels plus the "- " entries that start the line, plus the [ and {
// brackets open at each point (outside quoted scalars and comments). A field
// is a ':' followed by a space or the end of a line, outside quotes and
// comments. It stops as soon as a limit is passed. It can count a level or a
// field too many for unusual layouts (brackets or colons in a block scalar),
// never one too few for the structure the parser would build.
func measure(text []byte) shape {
	var sh shape
	var indents []int // open indentation widths, increasing
	flow := 0         // open [ and { brackets
	quote := byte(0)  // the quote character of an open quoted scalar
	over := func(n, d int) bool {
		if d > sh.depth {
			sh.depth, sh.depthLine = d, n
		}
		return d > MaxNesting
	}
	for n, l := range bytes.Split(text, []byte("\n")) {
		n++
		i := 0
		if flow == 0 && quote == 0 {
			for i < len(l) && l[i] == ' ' {
				i++
			}
			if i == len(l) || l[i] == '#' {
				continue // blank or comment line: no structure
			}
			for len(indents) > 0 && indents[len(indents)-1] >= i {
				indents = indents[:len(indents)-1]
			}
			indents = append(indents, i)
		}
		block := len(indents)
		for i+1 < len(l) && l[i] == '-' && (l[i+1] == ' ' || l[i+1] == '\t') {
			block++ // a compact list entry ("- - x") opens a level on the same line
			for i++; i < len(l) && (l[i] == ' ' || l[i] == '\t'); i++ {
			}
		}
		if over(n, block+flow) {
			return sh
		}
		// atValue: a value starts here, so a quote opens a quoted scalar
		// and a bracket a flow collection; inside a plain scalar of a block
		// line ("a [draft] note") they are text.
		atValue := true
		for ; i < len(l); i++ {
			c := l[i]
			if quote != 0 {
				if c == quote {
					quote = 0
				}
				continue
			}
			switch {
			case c == ' ' || c == '\t':
				if i > 0 && l[i-1] == ':' {
					atValue = true
				}
				continue
			case c == '#' && (i == 0 || l[i-1] == ' ' || l[i-1] == '\t'):
				i = len(l) // a comment runs to the end of the line
				continue
			case c == ':' && (i+1 == len(l) || l[i+1] == ' ' || l[i+1] == '\t' || l[i+1] == '\r'):
				if sh.fields++; sh.fields > MaxFields {
					sh.fieldsLine = n
					return sh
				}
			case (c == '"' || c == '\'') && atValue:
				quote = c
			case (c == '[' || c == '{') && (atValue || flow > 0):
				flow++
				if over(n, block+flow) {
					return sh
				}
				atValue = true
				continue
			case (c == ']' || c == '}') && flow > 0:
				flow--
			case c == ',' && flow > 0:
				atValue = true
				continue
			}
			atValue = false
		}
	}
	return sh
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

// Load reads and parses a scenario file. A file over MaxFileBytes is
// refused without reading it.
func Load(file string) (*Scenario, error) {
	f, err := os.Open(file)
	if err != nil {
		return nil, fmt.Errorf("scenario: %w", err)
	}
	defer f.Close()
	tooLarge := func(size int64) error {
		return &Error{Problems: []Problem{{File: file, Msg: fmt.Sprintf(
			"the file is %d bytes; a scenario file may be at most %d bytes (1 MiB)", size, MaxFileBytes)}}}
	}
	if fi, err := f.Stat(); err == nil && fi.Mode().IsRegular() && fi.Size() > MaxFileBytes {
		return nil, tooLarge(fi.Size())
	}
	// Read one byte more than allowed, so a file that grows, or one that is
	// not a regular file, cannot make us read without end.
	text, err := io.ReadAll(io.LimitReader(f, MaxFileBytes+1))
	if err != nil {
		return nil, fmt.Errorf("scenario: %w", err)
	}
	if len(text) > MaxFileBytes {
		return nil, &Error{Problems: []Problem{{File: file, Msg: fmt.Sprintf(
			"the file is more than %d bytes; a scenario file may be at most %d bytes (1 MiB)", MaxFileBytes, MaxFileBytes)}}}
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
		if sh := l.Shank; sh != nil {
			p.Legs[i].Shank = &plant.Shank{Length: sh.LengthM, Mass: sh.MassKG, COMDist: sh.COMM, Inertia: sh.InertiaKGM2,
				Actuated: sh.KneeActuated, Latch: sh.KneeLatch, StopAngle: sh.KneeStopRad}
		}
	}
	if t := s.Plant.Torso; t != nil {
		p.Torso = &plant.Torso{Mass: t.MassKG, COMDist: t.COMM, Inertia: t.InertiaKGM2}
	}
	for _, g := range s.Terrain.Segments {
		p.Terrain.Segments = append(p.Terrain.Segments, plant.Segment{Length: g.LengthM, Slope: g.SlopeRad,
			MuStatic: g.MuStatic, MuKinetic: g.MuKinetic, Belt: g.Belt != nil})
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

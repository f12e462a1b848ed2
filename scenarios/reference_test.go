package scenarios

import (
	"bytes"
	"flag"
	"fmt"
	"go/ast"
	"go/parser"
	"go/token"
	"path/filepath"
	"reflect"
	"sort"
	"strings"
	"testing"

	"gaitrig/internal/refdoc"
)

var update = flag.Bool("update", false, "rewrite docs/scenarios.md from the code")

// referencePath is the generated scenario reference page.
var referencePath = filepath.Join("..", "docs", "scenarios.md")

// schemaFiles are the files whose doc comments document the schema:
// scenario.go, and the pass criteria, which the loop owns (hil.Criteria).
var schemaFiles = []string{"scenario.go", filepath.Join("..", "hil", "alarmkinds.go")}

// fieldDocs reads the doc comments of the struct fields and constants in
// schemaFiles: docs["Plant.HipMassKG"], docs["const AlarmFall"].
func fieldDocs(t testing.TB) map[string]string {
	docs := map[string]string{}
	for _, file := range schemaFiles {
		fileDocs(t, file, docs)
	}
	return docs
}

// fileDocs adds the doc comments of one file to docs; a name already there
// (an alias in scenario.go of a constant in hil) keeps its first comment.
func fileDocs(t testing.TB, file string, docs map[string]string) {
	fset := token.NewFileSet()
	f, err := parser.ParseFile(fset, file, nil, parser.ParseComments)
	if err != nil {
		t.Fatal(err)
	}
	refdoc.FieldDocs([]*ast.File{f}, refdoc.DocOnly, docs)
	for _, decl := range f.Decls {
		g, ok := decl.(*ast.GenDecl)
		if !ok {
			continue
		}
		for _, spec := range g.Specs {
			if s, ok := spec.(*ast.ValueSpec); ok {
				for _, n := range s.Names {
					if _, seen := docs["const "+n.Name]; !seen {
						docs["const "+n.Name] = oneLine(s.Comment.Text())
					}
				}
			}
		}
	}
}

func oneLine(s string) string { return refdoc.OneLine(s) }

// row is one field of the reference.
type row struct {
	path, kind, def, doc string
}

func kindOf(t reflect.Type, path string) string {
	unit := unitOf(path)
	withU := func(s string) string {
		if unit != "" {
			return s + ", " + unit
		}
		return s
	}
	switch t.Kind() {
	case reflect.Pointer:
		if t.Elem().Kind() == reflect.Struct {
			return "block, optional"
		}
		return kindOf(t.Elem(), path)
	case reflect.Struct:
		return "block"
	case reflect.Float64:
		return withU("number")
	case reflect.Int, reflect.Int64:
		return "whole number"
	case reflect.Bool:
		return "true or false"
	case reflect.String:
		return "text"
	case reflect.Array:
		return withU(fmt.Sprintf("list of %d numbers", t.Len()))
	case reflect.Slice:
		if t.Elem().Kind() == reflect.Struct {
			return "list of blocks"
		}
		if t.Elem().Kind() == reflect.String {
			return "list of words"
		}
		return withU("list of numbers")
	case reflect.Map:
		if t.Elem().Kind() == reflect.Float64 {
			return withU("name: number lines")
		}
		return "name: word lines"
	}
	return t.String()
}

// collect walks the schema types and lists every field.
func collect(t testing.TB, docs map[string]string) []row {
	var rows []row
	var walk func(t reflect.Type, prefix string)
	walk = func(rt reflect.Type, prefix string) {
		for _, f := range yamlFields(rt) {
			sf := rt.FieldByIndex(f.index)
			owner := rt
			if len(f.index) > 1 { // inline: the field lives in the embedded struct
				owner = rt.Field(f.index[0]).Type
			}
			doc, ok := docs[owner.Name()+"."+sf.Name]
			if !ok || doc == "" {
				t.Errorf("field %s.%s (%s) has no doc comment", owner.Name(), sf.Name, join(prefix, f.name))
			}
			path := join(prefix, f.name)
			// The Go comment starts with the Go name; the page uses the
			// YAML name.
			if rest, ok := strings.CutPrefix(doc, sf.Name+" "); ok {
				doc = "`" + f.name + "` " + rest
			}
			rows = append(rows, row{path: path, kind: kindOf(sf.Type, path), doc: doc, def: defaultText(path)})
			et := sf.Type
			for et.Kind() == reflect.Pointer {
				et = et.Elem()
			}
			switch {
			case et.Kind() == reflect.Struct:
				walk(et, path)
			case et.Kind() == reflect.Slice && et.Elem().Kind() == reflect.Struct:
				walk(et.Elem(), path+"[]")
			}
		}
	}
	walk(reflect.TypeOf(Scenario{}), "")
	return rows
}

func defaultText(path string) string {
	for _, d := range defaults {
		if d.path == path {
			v := "`" + formatDefault(d.value) + "`"
			if strings.HasPrefix(path, "controller.") && path != "controller.link" {
				return v + " (" + ownerLink(path) + ")"
			}
			return v
		}
	}
	switch path {
	case "terrain.segments[].mu_kinetic":
		return fmt.Sprintf("%g × mu_static", MuKineticRatio)
	case "alarms":
		return "see the alarm table"
	}
	return ""
}

func ownerLink(path string) string {
	switch strings.TrimPrefix(path, "controller.") {
	case "mode", "settings":
		return "link builtin"
	case "port", "baud":
		return "link serial"
	}
	return "link mqtt"
}

func referencePage(t testing.TB) []byte {
	docs := fieldDocs(t)
	rows := collect(t, docs)
	var b bytes.Buffer
	b.WriteString("<!-- Generated from scenarios/scenario.go and scenarios/defaults.go by\n" +
		"     `go generate ./scenarios`; do not edit by hand. A test fails when this\n" +
		"     page and the code disagree. -->\n\n")
	b.WriteString("# Scenario reference\n\n")
	b.WriteString("A scenario is one YAML file: the walker, the ground, the controller link,\n" +
		"the run length, the sensor and actuator models, injected faults, alarm\n" +
		"severities and pass criteria. Check one with `gaitrig check FILE`.\n\n" +
		"Units are part of the field names and are SI: `_m` metres, `_kg`\n" +
		"kilograms, `_kgm2` kg·m², `_s` seconds, `_ms` milliseconds, `_us`\n" +
		"microseconds, `_rad` radians, `_radps` rad/s, `_mps` m/s, `_mps2` m/s²,\n" +
		"`_n` newtons, `_nm` N·m, `_ns` N·s. Write plain numbers: `\"5 deg\"` or\n" +
		"`\"4 kg\"` is an error that says so.\n\n" +
		"Loading is strict. An unknown field, a wrong type, a missing required\n" +
		"value or an out-of-range number is an error naming the file, the line,\n" +
		"the field path and what is allowed, for example\n\n" +
		"    level.yaml:14: plant.legs.foot_radius_m: 1.2 m is larger than the leg length 0.9 m; allowed 0 ≤ foot_radius_m ≤ length_m\n\n" +
		"All problems of a file are reported together. Angles follow the plant's\n" +
		"convention: measured counter-clockwise from the world vertical, x forward,\n" +
		"y up; a leg angle > 0 puts the foot ahead of the hip, a forward torso lean\n" +
		"is negative. Secrets never appear in a scenario: `username_env` and\n" +
		"`password_env` name environment variables; a literal `password` field is\n" +
		"an error.\n\n")
	b.WriteString(loadingNotes())
	// Top-level scalars share one table; each block gets its own.
	var order []string
	groups := map[string][]row{}
	for _, r := range rows {
		top, _, _ := strings.Cut(r.path, ".")
		top, _, _ = strings.Cut(top, "[")
		if r.path == top && !strings.Contains(r.kind, "block") {
			top = "top level"
		}
		if _, ok := groups[top]; !ok {
			order = append(order, top)
		}
		groups[top] = append(groups[top], r)
	}
	for _, top := range order {
		fmt.Fprintf(&b, "## %s\n\n| field | type | default | meaning |\n| --- | --- | --- | --- |\n", top)
		for _, r := range groups[top] {
			fmt.Fprintf(&b, "| `%s` | %s | %s | %s |\n", r.path, r.kind, r.def, strings.ReplaceAll(r.doc, "|", "\\|"))
		}
		b.WriteString("\n")
	}

	b.WriteString("## Fault kinds\n\nEach entry of `faults` has a `kind`; only the fields listed for that kind may appear.\n\n| kind | fields | meaning |\n| --- | --- | --- |\n")
	for _, k := range []string{FaultLatency, FaultDrop, FaultCorrupt, FaultFreeze, FaultPush} {
		fmt.Fprintf(&b, "| `%s` | %s | %s |\n", k, strings.Join(faultFields[k], ", "), docs["const Fault"+strings.ToUpper(k[:1])+k[1:]])
	}
	b.WriteString("\n## Alarm kinds and default severities\n\n`warn` logs and counts the alarm and the run goes on; `trip` e-stops the run (outcome `tripped`). Set a severity under `alarms:`, for example `friction_limit: warn`.\n\n| kind | default | raised when |\n| --- | --- | --- |\n")
	constName := map[string]string{}
	for name := range docs {
		if strings.HasPrefix(name, "const Alarm") {
			constName[name] = name
		}
	}
	for _, k := range AlarmKinds {
		var doc string
		for name := range constName {
			if snake(strings.TrimPrefix(name, "const Alarm")) == k {
				doc = docs[name]
			}
		}
		if doc == "" {
			t.Errorf("alarm kind %s has no constant with a comment", k)
		}
		fmt.Fprintf(&b, "| `%s` | `%s` | %s |\n", k, DefaultSeverity[k], doc)
	}
	b.WriteString("\n## Built-in scenarios\n\nRun one by name, for example `gaitrig run level-demo`.\n\n| name | what it exercises |\n| --- | --- |\n")
	for _, e := range Library() {
		fmt.Fprintf(&b, "| `%s` | %s |\n", e.Name, e.Description)
	}
	demo, err := BuiltinText("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	b.WriteString("\n## A complete example\n\nThe built-in `level-demo`:\n\n```yaml\n")
	b.Write(demo)
	b.WriteString("```\n")
	return b.Bytes()
}

// snake turns FrictionLimit into friction_limit.
func snake(s string) string {
	var b strings.Builder
	for i, r := range s {
		if r >= 'A' && r <= 'Z' {
			if i > 0 {
				b.WriteByte('_')
			}
			r += 'a' - 'A'
		}
		b.WriteRune(r)
	}
	return b.String()
}

// TestReferencePage fails when docs/scenarios.md is not what the code
// generates. Regenerate with: go generate ./scenarios
func TestReferencePage(t *testing.T) {
	refdoc.CheckPage(t, referencePath, referencePage(t), *update, "go generate ./scenarios")
}

// TestDefaultsMatchComments checks that each field comment states the
// default the loader applies, so the Go doc and the page cannot drift from
// the code.
func TestDefaultsMatchComments(t *testing.T) {
	docs := fieldDocs(t)
	byPath := map[string]string{}
	for _, r := range collect(t, docs) {
		byPath[r.path] = r.doc
	}
	for _, d := range defaults {
		doc, ok := byPath[d.path]
		if !ok {
			t.Errorf("default for %s names no field", d.path)
			continue
		}
		if want := "Default " + formatDefault(d.value); !strings.Contains(doc, want) {
			t.Errorf("%s: comment does not say %q: %s", d.path, want, doc)
		}
	}
	// Every alarm kind has a default severity and nothing else does.
	var kinds []string
	for k := range DefaultSeverity {
		kinds = append(kinds, k)
	}
	sort.Strings(kinds)
	all := append([]string(nil), AlarmKinds...)
	sort.Strings(all)
	if !reflect.DeepEqual(kinds, all) {
		t.Errorf("DefaultSeverity kinds %v differ from AlarmKinds %v", kinds, all)
	}
}

package record

import (
	"bytes"
	"flag"
	"fmt"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	"gaitrig/internal/refdoc"
)

var update = flag.Bool("update", false, "rewrite docs/run-folder.md from the code")

// runFolderPage is the generated run-folder reference.
var runFolderPage = filepath.Join("..", "docs", "run-folder.md")

// typeDocs reads the doc (or end-of-line) comments of the struct fields of
// the package's non-test files: docs["Manifest.Seed"].
func typeDocs(t testing.TB) map[string]string {
	files, err := refdoc.ParseDir(".")
	if err != nil {
		t.Fatal(err)
	}
	docs := map[string]string{}
	refdoc.FieldDocs(files, refdoc.DocFirst, docs)
	return docs
}

// jsonRow is one field of a JSON file of the run folder.
type jsonRow struct{ path, kind, doc string }

func jsonKind(rt reflect.Type) string {
	switch {
	case rt == reflect.TypeOf(time.Time{}):
		return "time (RFC 3339 text)"
	case rt == reflect.TypeOf(Outcome("")), rt == reflect.TypeOf(Severity("")):
		return "word"
	}
	switch rt.Kind() {
	case reflect.Pointer:
		if rt.Elem().Kind() == reflect.Struct {
			return "object or null"
		}
		return jsonKind(rt.Elem())
	case reflect.Struct:
		return "object"
	case reflect.Float64:
		return "number"
	case reflect.Int, reflect.Int64:
		return "whole number"
	case reflect.Bool:
		return "true or false"
	case reflect.String:
		return "text"
	case reflect.Array:
		if rt.Elem().Kind() == reflect.Struct {
			return fmt.Sprintf("list of %d objects", rt.Len())
		}
		return fmt.Sprintf("list of %d numbers", rt.Len())
	case reflect.Slice:
		switch rt.Elem().Kind() {
		case reflect.Struct:
			return "list of objects"
		case reflect.String:
			return "list of text"
		}
		return "list of numbers"
	case reflect.Map:
		return "object: name → " + jsonKind(rt.Elem())
	}
	return rt.String()
}

// jsonRows lists the JSON fields of rt (and of the objects inside it) with
// their comments. The Go comment starts with the Go name; the page uses the
// JSON name.
func jsonRows(t testing.TB, docs map[string]string, rt reflect.Type, prefix string) []jsonRow {
	var rows []jsonRow
	for i := 0; i < rt.NumField(); i++ {
		sf := rt.Field(i)
		name, _, _ := strings.Cut(sf.Tag.Get("json"), ",")
		if name == "" || name == "-" || !sf.IsExported() {
			continue
		}
		path := name
		if prefix != "" {
			path = prefix + "." + name
		}
		doc := docs[rt.Name()+"."+sf.Name]
		if doc == "" {
			t.Errorf("%s.%s (%s) has no comment for the reference page", rt.Name(), sf.Name, path)
		}
		doc = leadOff(doc, sf.Name)
		rows = append(rows, jsonRow{path, jsonKind(sf.Type), doc})
		et := sf.Type
		for et.Kind() == reflect.Pointer {
			et = et.Elem()
		}
		switch {
		case et == reflect.TypeOf(time.Time{}):
		case et.Kind() == reflect.Struct:
			rows = append(rows, jsonRows(t, docs, et, path)...)
		case (et.Kind() == reflect.Slice || et.Kind() == reflect.Array) && et.Elem().Kind() == reflect.Struct:
			rows = append(rows, jsonRows(t, docs, et.Elem(), path+"[]")...)
		}
	}
	return rows
}

// leadOff turns a Go comment "Seed is the random seed …" into the page's
// "The random seed …", and "Link describes …" into "Describes …".
func leadOff(doc, goName string) string {
	rest, ok := strings.CutPrefix(doc, goName+" ")
	if !ok {
		return doc
	}
	for _, verb := range []string{"is ", "are "} {
		if r, ok := strings.CutPrefix(rest, verb); ok && r != "" {
			return strings.ToUpper(r[:1]) + r[1:]
		}
	}
	return strings.ToUpper(rest[:1]) + rest[1:]
}

func writeJSONTable(b *bytes.Buffer, rows []jsonRow) {
	b.WriteString("| field | type | meaning |\n| --- | --- | --- |\n")
	for _, r := range rows {
		fmt.Fprintf(b, "| `%s` | %s | %s |\n", r.path, r.kind, cell(r.doc))
	}
	b.WriteString("\n")
}

func cell(s string) string { return strings.ReplaceAll(s, "|", "\\|") }

func unitText(c Column) string {
	if c.Unit == "" {
		return "–"
	}
	return c.Unit
}

func referencePage(t testing.TB) []byte {
	docs := typeDocs(t)
	var b bytes.Buffer
	b.WriteString("<!-- Generated from the record package (the column tables in record/tick.go,\n" +
		"     the manifest, event and summary types) by `go generate ./record`; do not\n" +
		"     edit by hand. A test fails when this page and the code disagree. -->\n\n")
	b.WriteString("# Run folder reference\n\n")
	fmt.Fprintf(&b, "Every run writes one folder (by default `runs/<scenario>-<UTC time>/`). This page\n"+
		"describes run folder schema %d: every file, the manifest fields, every telemetry\n"+
		"column with its unit, and the fields of `steps.csv`, `events.jsonl` and\n"+
		"`summary.json`. The `record` package writes and reads these folders; `gaitrig\n"+
		"report` and `gaitrig replay` work from a folder alone.\n\n", SchemaVersion)
	b.WriteString("> " + Caution + " Every `summary.json` and report carries this caution.\n\n")

	b.WriteString("## Files\n\n| file | what it holds |\n| --- | --- |\n")
	for _, f := range []struct{ name, doc string }{
		{ManifestFile, "what ran: the scenario text and its SHA-256, the plant as it ran, the firmware's greeting, tool version, seed, clock, host, start time, the exact initial state and the telemetry header. Written before the first tick."},
		{TelemetryFile, "one row per tick (columns below), streamed and flushed at least every " + FlushInterval.String() + " of wall time, so a killed run leaves a readable file; a cut last line is skipped by readers. Floats are written in the shortest form that reads back to the same bits (`gaitrig replay` relies on it); NaN, +Inf and -Inf as those words."},
		{EventsFile, "alarms and other events, one JSON object per line, written through at once."},
		{StepsFile, "one row per completed step, from one heel strike to the next (columns below)."},
		{SummaryFile, "the outcome, written last and atomically; missing when the run was killed."},
		{ParquetFile, "on request (`--parquet`): the telemetry columns below in Parquet, Zstandard-compressed; count columns as int64, codes as int32, flags as boolean, the rest as double."},
		{"report.html", "the self-contained HTML report with its plots (`gaitrig report` rewrites it)."},
		{"junit.xml", "one test case per pass criterion, for CI systems (`--junit`)."},
	} {
		fmt.Fprintf(&b, "| `%s` | %s |\n", f.name, f.doc)
	}

	b.WriteString("\n## manifest.json\n\nOne JSON object. Units are in the field names as in scenario files.\n\n")
	writeJSONTable(&b, jsonRows(t, docs, reflect.TypeOf(Manifest{}), ""))
	b.WriteString("### Schema versions\n\n" +
		"- **2** (this build): `schema_version: 2`, the typed `plant` block above and the\n" +
		"  column names below.\n" +
		"- **1** (gaitrig before the typed run records): no `schema_version` but\n" +
		"  `\"format\": 1`; the `plant` block had the plant's Go field names without units\n" +
		"  (`HipMass`, `Legs[].FootRadius`, `Terrain.Segments[].MuStatic`, …), and the\n" +
		"  telemetry columns had the schema 1 names listed in the last column of the\n" +
		"  table below. Such folders still read: the plant block is converted and the\n" +
		"  columns are mapped to the current names (`energy_total_j` is computed).\n" +
		"  `gaitrig report`, `replay` and the Parquet export work on them.\n" +
		"- A folder of a newer schema is refused with an error that names it.\n\n")

	b.WriteString("## telemetry.csv\n\n" +
		"One header line, then one row per tick. Each row holds the plant state at the end\n" +
		"of the tick, the sensor readings the firmware was sent at its start and the\n" +
		"torques held over it. Column names follow one scheme: the quantity, then what\n" +
		"it belongs to (the hip, a link `left`/`right`/`torso`, a joint from the\n" +
		"manifest's `joint_names`, a foot `left`/`right`), then the unit as in scenario\n" +
		"files (`_m`, `_rad`, `_radps`, `_mps`, `_n`, `_nm`, `_j`, `_s`, `_us`);\n" +
		"dimensionless numbers, codes and flags carry no unit. Angles follow the plant's\n" +
		"convention: counter-clockwise from the world vertical, x forward, y up.\n\n" +
		"Kinds: *real* is a float64, *count* and *code* are whole numbers (a code names a\n" +
		"state), *flag* is 1 or 0.\n\n")
	torso := TickColumns(5, []string{"hip_left", "hip_right"})
	b.WriteString("### A walker with a torso\n\n5 generalized coordinates, joints `hip_left` and `hip_right`:\n\n" +
		"| column | unit | kind | meaning | schema 1 name |\n| --- | --- | --- | --- | --- |\n")
	for _, c := range torso {
		v1 := "(new)"
		if c.V1Name != "" {
			v1 = "`" + c.V1Name + "`"
		}
		fmt.Fprintf(&b, "| `%s` | %s | %s | %s | %s |\n", c.Name, unitText(c), c.Kind, cell(c.Doc), v1)
	}
	b.WriteString("\n### A compass walker\n\n4 generalized coordinates (no torso), one joint `hip` (right leg angle minus\nleft leg angle); the same kinds of columns:\n\n")
	var names []string
	for _, c := range TickColumns(4, []string{"hip"}) {
		names = append(names, "`"+c.Name+"`")
	}
	b.WriteString(strings.Join(names, ", ") + "\n\n")
	b.WriteString("### A walker with knees\n\nA kneed leg's own link is its thigh (`thigh_left`, `thigh_right`); the shanks\n" +
		"(`shank_left`, `shank_right`) follow the torso in the coordinates, and actuated\n" +
		"knees are joints `knee_left`, `knee_right` after the hips. Each kneed leg adds\n" +
		"or renames these columns (here for a torso walker with both knees actuated, 7\n" +
		"generalized coordinates; the knee columns come just before `push_x_n`):\n\n| column | unit | kind | meaning |\n| --- | --- | --- | --- |\n")
	for _, c := range TickColumns(7, []string{"hip_left", "hip_right", "knee_left", "knee_right"}) {
		if strings.Contains(c.Name, "knee") || strings.Contains(c.Name, "thigh") || strings.Contains(c.Name, "shank") {
			fmt.Fprintf(&b, "| `%s` | %s | %s | %s |\n", c.Name, unitText(c), c.Kind, cell(c.Doc))
		}
	}
	b.WriteString("\n")

	b.WriteString("## steps.csv\n\nOne header line, then one row per completed step.\n\n| column | unit | kind | meaning |\n| --- | --- | --- | --- |\n")
	for _, c := range StepColumns() {
		fmt.Fprintf(&b, "| `%s` | %s | %s | %s |\n", c.Name, unitText(c), c.Kind, cell(c.Doc))
	}

	b.WriteString("\n## events.jsonl\n\nOne JSON object per line. `segment` is left out when the event is tied to no\nterrain segment, `foot` and `values` when empty; a non-finite value is written as\nthe text `NaN`, `+Inf` or `-Inf`.\n\n")
	writeJSONTable(&b, jsonRows(t, docs, reflect.TypeOf(Event{}), ""))

	b.WriteString("## summary.json\n\nOne JSON object, written when the run ends. Non-finite numbers are written as\n`null` (NaN) or the text `\"+Inf\"` / `\"-Inf\"`, except `min_normal_force_n`,\nwhich is `null` when no stance foot touched the ground (a run with no ticks).\n\n")
	writeJSONTable(&b, jsonRows(t, docs, reflect.TypeOf(Summary{}), ""))
	fmt.Fprintf(&b, "The `caution` field always reads:\n\n> %s\n", Caution)
	return b.Bytes()
}

// TestReferencePage fails when docs/run-folder.md is not what the code
// generates. Regenerate with: go generate ./record
func TestReferencePage(t *testing.T) {
	refdoc.CheckPage(t, runFolderPage, referencePage(t), *update, "go generate ./record")
}

// TestEveryColumnDocumented: every column of both walkers and of steps.csv
// has a name, a meaning, and a unit exactly when its kind is real and its
// name ends in a unit suffix; names are unique within a file.
func TestEveryColumnDocumented(t *testing.T) {
	suffixUnit := map[string]string{"_m": "m", "_rad": "rad", "_radps": "rad/s", "_mps": "m/s", "_n": "N", "_nm": "N·m", "_j": "J", "_s": "s", "_us": "µs"}
	for name, cols := range map[string][]Column{
		"torso":         TickColumns(5, []string{"hip_left", "hip_right"}),
		"compass":       TickColumns(4, []string{"hip"}),
		"one leg":       TickColumns(3, nil),
		"kneed":         TickColumns(7, []string{"hip_left", "hip_right", "knee_left", "knee_right"}),
		"kneed compass": TickColumns(6, []string{"hip"}),
		"steps":         StepColumns(),
	} {
		seen := map[string]bool{}
		for _, c := range cols {
			if seen[c.Name] {
				t.Errorf("%s: column %s twice", name, c.Name)
			}
			seen[c.Name] = true
			if c.Doc == "" {
				t.Errorf("%s: column %s has no meaning", name, c.Name)
			}
			unit := ""
			if i := strings.LastIndexByte(c.Name, '_'); i >= 0 {
				unit = suffixUnit[c.Name[i:]]
			}
			if c.Kind != Real {
				unit = ""
			}
			if c.Unit != unit {
				t.Errorf("%s: column %s has unit %q, its name says %q", name, c.Name, c.Unit, unit)
			}
		}
	}
}

package main

import (
	"bytes"
	"flag"
	"fmt"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"gaitrig/internal/refdoc"
)

var update = flag.Bool("update", false, "rewrite docs/cli.md from the code")

// TestCLIReference fails while docs/cli.md differs from what the command
// table and the result types give; -update rewrites it.
func TestCLIReference(t *testing.T) {
	want := cliReference()
	refdoc.CheckPage(t, filepath.Join("..", "..", "docs", "cli.md"), []byte(want), *update, "go generate ./cmd/gaitrig")
	for _, name := range sortedKeys(commands) {
		if !strings.Contains(want, "\n## gaitrig "+name+"\n") {
			t.Errorf("docs/cli.md has no section for %s", name)
		}
	}
}

// cliReference renders docs/cli.md: every command's help as --help prints
// it, in the order of the command table, and the schema of each --json
// document, read from its Go type.
func cliReference() string {
	var b strings.Builder
	b.WriteString("<!-- Generated from the command table and the JSON result types of cmd/gaitrig by\n" +
		"     `go generate ./cmd/gaitrig`; do not edit by hand. A test fails when this\n" +
		"     page and the code disagree. -->\n\n")
	b.WriteString("# Command-line reference\n\n")
	b.WriteString("Every command prints this help with `gaitrig COMMAND --help` (on stdout).\n" +
		"A usage error prints one line on stderr, then where to find the help, and exits with code 2.\n" +
		"Exit codes: 0 pass, 1 a criterion failed or the run tripped (a regression in a suite,\n" +
		"NO-GO in preflight), 2 bad usage or configuration, 3 invalid: the host, not the firmware,\n" +
		"spoiled the run or left a check unjudged (host_stall; run it again), 130 a second interrupt.\n\n")
	b.WriteString("With `--json` a command prints one JSON document on stdout and nothing else there\n" +
		"(progress lines go to stderr): UTF-8 without HTML escaping, numbers that were not\n" +
		"measured or are not finite as `null`. Its schema is listed under the command. A command\n" +
		"that could not start (bad usage, a scenario or link that cannot be used) prints no\n" +
		"document: its error is on stderr and the exit code is 2.\n\n")
	b.WriteString("## Commands\n\n| command | what it does |\n| --- | --- |\n")
	names := sortedKeys(commands)
	for _, n := range names {
		fmt.Fprintf(&b, "| [`%s`](#gaitrig-%s) | %s |\n", n, n, commands[n].summary)
	}
	for _, n := range names {
		var out, errb bytes.Buffer
		commands[n].run([]string{"--help"}, &out, &errb)
		fmt.Fprintf(&b, "\n## gaitrig %s\n\n```text\n%s```\n", n, out.String())
		if t, ok := jsonResults[n]; ok {
			b.WriteString("\n`--json` prints:\n\n| field | JSON type | meaning |\n| --- | --- | --- |\n")
			writeSchema(&b, reflect.TypeOf(t), "")
		}
	}
	return b.String()
}

// writeSchema lists the JSON fields of t, nested fields as parent.child and
// array elements as parent[].child.
func writeSchema(b *strings.Builder, t reflect.Type, prefix string) {
	for t.Kind() == reflect.Pointer {
		t = t.Elem()
	}
	switch t.Kind() {
	case reflect.Slice, reflect.Array:
		if prefix == "" {
			fmt.Fprintf(b, "| (document) | array of %s | |\n", jsonType(t.Elem()))
		}
		writeSchema(b, t.Elem(), prefix+"[]")
		return
	case reflect.Struct:
	default:
		return
	}
	for i := 0; i < t.NumField(); i++ {
		f := t.Field(i)
		if !f.IsExported() {
			continue
		}
		name, opts, _ := strings.Cut(f.Tag.Get("json"), ",")
		if name == "-" {
			continue
		}
		if name == "" {
			name = f.Name
		}
		path := name
		if prefix != "" {
			path = prefix + "." + name
		}
		doc := fieldDoc(t, f.Name)
		if strings.Contains(opts, "omitempty") {
			doc = strings.TrimSpace(doc + " (left out when empty)")
		}
		fmt.Fprintf(b, "| `%s` | %s | %s |\n", path, jsonType(f.Type), strings.ReplaceAll(doc, "|", "\\|"))
		ft := f.Type
		for ft.Kind() == reflect.Pointer {
			ft = ft.Elem()
		}
		if ft.Kind() == reflect.Struct || ((ft.Kind() == reflect.Slice || ft.Kind() == reflect.Array) && isStruct(ft.Elem())) {
			writeSchema(b, ft, path)
		}
	}
}

func isStruct(t reflect.Type) bool {
	for t.Kind() == reflect.Pointer {
		t = t.Elem()
	}
	return t.Kind() == reflect.Struct
}

// jsonType names the JSON type a Go type encodes as (through rig.JSONSafe).
func jsonType(t reflect.Type) string {
	null := ""
	for t.Kind() == reflect.Pointer {
		t, null = t.Elem(), " or null"
	}
	switch t.Kind() {
	case reflect.Bool:
		return "boolean" + null
	case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64,
		reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64:
		return "integer" + null
	case reflect.Float32, reflect.Float64:
		return "number or null"
	case reflect.String:
		return "string" + null
	case reflect.Slice, reflect.Array:
		return "array of " + jsonType(t.Elem())
	case reflect.Map:
		return "object of " + jsonType(t.Elem())
	case reflect.Struct:
		return "object" + null
	}
	return t.Kind().String()
}

// fieldDocs caches the field comments of the packages read so far.
var fieldDocs = map[string]map[string]string{}

// fieldDoc is the comment of field name of struct type t, read from the
// type's source (the line comment, else the doc comment), or "".
func fieldDoc(t reflect.Type, name string) string {
	pkg := t.PkgPath()
	docs, ok := fieldDocs[pkg]
	if !ok {
		docs = map[string]string{}
		dir := "."
		if pkg != "main" {
			dir = filepath.Join("..", "..", strings.TrimPrefix(pkg, "gaitrig/"))
		}
		if files, err := refdoc.ParseDir(dir); err == nil {
			refdoc.FieldDocs(files, refdoc.LineFirst, docs)
		}
		fieldDocs[pkg] = docs
	}
	return docs[t.Name()+"."+name]
}

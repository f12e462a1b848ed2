package main

import (
	"bytes"
	"fmt"
	"reflect"
	"strings"
)

// jsonResults maps each command that has --json to the Go type of the
// document it prints. docs/cli.md documents each type's fields (generated
// by TestCLIReference; run `go generate ./cmd/gaitrig` to refresh it), and
// a test requires every command with a --json flag to be listed here.
var jsonResults = map[string]any{}

//go:generate go test -run TestCLIReference -update

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
		"NO-GO in preflight), 2 bad usage or configuration.\n\n")
	b.WriteString("With `--json` a command prints one JSON document on stdout and nothing else there\n" +
		"(progress lines go to stderr): UTF-8 without HTML escaping, numbers that were not\n" +
		"measured or are not finite as `null`. Its schema is listed under the command.\n\n")
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
			b.WriteString("\n`--json` prints:\n\n| field | JSON type |\n| --- | --- |\n")
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
			fmt.Fprintf(b, "| (document) | array of %s |\n", jsonType(t.Elem()))
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
		name, _, _ := strings.Cut(f.Tag.Get("json"), ",")
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
		fmt.Fprintf(b, "| `%s` | %s |\n", path, jsonType(f.Type))
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

// Package refdoc holds what the tests that generate the reference pages
// (docs/run-folder.md, docs/scenarios.md, docs/cli.md) share: reading the
// comments of struct fields from Go source, and checking a generated page
// against the file in docs/ (or rewriting it, for go generate).
package refdoc

import (
	"bytes"
	"go/ast"
	"go/parser"
	"go/token"
	"io/fs"
	"os"
	"strings"
	"testing"
)

// Prefer says which comment of a struct field counts.
type Prefer int

const (
	// DocFirst takes the doc comment above the field, else its line comment.
	DocFirst Prefer = iota
	// LineFirst takes the line comment after the field, else its doc comment.
	LineFirst
	// DocOnly takes the doc comment above the field ("" without one).
	DocOnly
)

// ParseDir parses the Go files of dir that are not tests, with their
// comments.
func ParseDir(dir string) ([]*ast.File, error) {
	pkgs, err := parser.ParseDir(token.NewFileSet(), dir, func(fi fs.FileInfo) bool { return !strings.HasSuffix(fi.Name(), "_test.go") }, parser.ParseComments)
	if err != nil {
		return nil, err
	}
	var out []*ast.File
	for _, p := range pkgs {
		for _, f := range p.Files {
			out = append(out, f)
		}
	}
	return out, nil
}

// FieldDocs sets docs["Type.Field"] to the comment (as prefer picks it,
// folded to one line by OneLine) of every field of every struct type
// declared in files; a field without one gets "".
func FieldDocs(files []*ast.File, prefer Prefer, docs map[string]string) {
	for _, f := range files {
		ast.Inspect(f, func(n ast.Node) bool {
			ts, ok := n.(*ast.TypeSpec)
			if !ok {
				return true
			}
			st, ok := ts.Type.(*ast.StructType)
			if !ok {
				return true
			}
			for _, fl := range st.Fields.List {
				text := comment(fl, prefer)
				for _, id := range fl.Names {
					docs[ts.Name.Name+"."+id.Name] = OneLine(text)
				}
			}
			return true
		})
	}
}

func comment(fl *ast.Field, prefer Prefer) string {
	switch prefer {
	case LineFirst:
		if fl.Comment != nil {
			return fl.Comment.Text()
		}
		return fl.Doc.Text()
	case DocOnly:
		return fl.Doc.Text()
	}
	if text := fl.Doc.Text(); text != "" {
		return text
	}
	return fl.Comment.Text()
}

// OneLine folds a comment's white space (line breaks included) to single
// spaces.
func OneLine(s string) string { return strings.Join(strings.Fields(s), " ") }

// CheckPage fails t when the file at path does not hold page exactly;
// with update it writes page there instead. regenerate is the command
// that rewrites the file (go generate ./record), named in the failure.
func CheckPage(t testing.TB, path string, page []byte, update bool, regenerate string) {
	t.Helper()
	if update {
		if err := os.WriteFile(path, page, 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	have, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v; generate it with: %s", err, regenerate)
	}
	if !bytes.Equal(have, page) {
		t.Fatalf("%s is out of date with the code; regenerate it with: %s", path, regenerate)
	}
}

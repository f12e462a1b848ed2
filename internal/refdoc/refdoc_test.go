package refdoc

import (
	"go/ast"
	"go/parser"
	"go/token"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

const src = `package p

type T struct {
	// A's doc
	// in two lines.
	A int // A's line
	// B's doc.
	B int
	C int // C's line
	D, E int
}

func f() {
	type inner struct {
		X int // X's line
	}
}
`

func TestFieldDocs(t *testing.T) {
	f, err := parser.ParseFile(token.NewFileSet(), "p.go", src, parser.ParseComments)
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		prefer Prefer
		want   map[string]string
	}{
		{DocFirst, map[string]string{"T.A": "A's doc in two lines.", "T.B": "B's doc.", "T.C": "C's line", "T.D": "", "T.E": "", "inner.X": "X's line"}},
		{LineFirst, map[string]string{"T.A": "A's line", "T.B": "B's doc.", "T.C": "C's line", "T.D": "", "T.E": "", "inner.X": "X's line"}},
		{DocOnly, map[string]string{"T.A": "A's doc in two lines.", "T.B": "B's doc.", "T.C": "", "T.D": "", "T.E": "", "inner.X": ""}},
	} {
		got := map[string]string{}
		FieldDocs([]*ast.File{f}, tc.prefer, got)
		if len(got) != len(tc.want) {
			t.Errorf("prefer %d: %d fields, want %d: %q", tc.prefer, len(got), len(tc.want), got)
		}
		for k, w := range tc.want {
			if got[k] != w {
				t.Errorf("prefer %d: %s = %q, want %q", tc.prefer, k, got[k], w)
			}
		}
	}
}

func TestParseDirLeavesOutTests(t *testing.T) {
	dir := t.TempDir()
	for name, text := range map[string]string{"a.go": "package p\n\ntype A struct{ X int }\n", "a_test.go": "package p\n\ntype B struct{ Y int }\n"} {
		if err := os.WriteFile(filepath.Join(dir, name), []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	files, err := ParseDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	docs := map[string]string{}
	FieldDocs(files, DocFirst, docs)
	if _, ok := docs["A.X"]; !ok || len(docs) != 1 {
		t.Errorf("fields read %v, want A.X only", docs)
	}
}

// fakeT records a fatal failure instead of ending the test.
type fakeT struct {
	testing.TB
	msg string
}

func (f *fakeT) Helper()                           {}
func (f *fakeT) Fatalf(format string, args ...any) { f.msg = format; panic(f) }
func (f *fakeT) Fatal(args ...any)                 { f.msg = "fatal"; panic(f) }

func check(path string, page []byte, update bool) (msg string) {
	ft := &fakeT{}
	defer func() {
		if r := recover(); r != nil {
			if r != ft {
				panic(r)
			}
			msg = ft.msg
		}
	}()
	CheckPage(ft, path, page, update, "go generate ./x")
	return ""
}

func TestCheckPage(t *testing.T) {
	path := filepath.Join(t.TempDir(), "page.md")
	if msg := check(path, []byte("one\n"), false); msg == "" {
		t.Error("a missing page passed")
	}
	if msg := check(path, []byte("one\n"), true); msg != "" {
		t.Errorf("update failed: %s", msg)
	}
	if msg := check(path, []byte("one\n"), false); msg != "" {
		t.Errorf("the page just written fails: %s", msg)
	}
	if msg := check(path, []byte("two\n"), false); !strings.Contains(msg, "out of date") {
		t.Errorf("a stale page gives %q, want out of date", msg)
	}
}

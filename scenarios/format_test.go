package scenarios

import (
	"reflect"
	"slices"
	"strings"
	"testing"
)

// TestFormatLoadsBack writes every built-in scenario with Format and loads
// the text again: it must give back the same scenario, field by field and
// by reflect.DeepEqual, and keep the head and tail comments.
func TestFormatLoadsBack(t *testing.T) {
	lib := Library()
	if len(lib) == 0 {
		t.Fatal("no built-in scenarios")
	}
	for _, e := range lib {
		s, err := LoadBuiltin(e.Name)
		if err != nil {
			t.Errorf("%s: %v", e.Name, err)
			continue
		}
		const head, tail = "# head line\n", "\n# tail line\n"
		text, err := Format(s, head, tail)
		if err != nil {
			t.Errorf("%s: %v", e.Name, err)
			continue
		}
		if !strings.HasPrefix(string(text), head) || !strings.HasSuffix(string(text), tail) {
			t.Errorf("%s: head or tail lost:\n%s", e.Name, text)
		}
		again, err := Parse(s.File, text)
		if err != nil {
			t.Errorf("%s: written text does not load: %v\n%s", e.Name, err, text)
			continue
		}
		if d := Differences(s, again); len(d) > 0 {
			t.Errorf("%s: written text differs at %v\n%s", e.Name, d, text)
		}
		again.Text = s.Text
		if !reflect.DeepEqual(s, again) {
			t.Errorf("%s: written text loads into a different scenario (reflect.DeepEqual)", e.Name)
		}
	}
}

// TestDifferencesNamesFields changes two fields of a loaded scenario and
// checks that Differences names exactly those, in the loader's spelling.
func TestDifferencesNamesFields(t *testing.T) {
	a, err := LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	b, err := LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	if d := Differences(a, b); len(d) != 0 {
		t.Fatalf("same file differs at %v", d)
	}
	b.Name += "-x"
	b.Terrain.Segments[0].MuStatic += 0.1
	want := []string{"name", "terrain.segments[0].mu_static"}
	if d := Differences(a, b); !slices.Equal(d, want) {
		t.Errorf("Differences = %v, want %v", d, want)
	}
}

// TestEveryFieldHasYAMLName checks that every field of the schema the
// loader reads has a YAML name in its tag: the loader, Format and
// Differences all use the tag's name as written, so a field without one
// could be neither given in a file nor written.
func TestEveryFieldHasYAMLName(t *testing.T) {
	seen := map[reflect.Type]bool{}
	var walk func(reflect.Type, string)
	walk = func(ty reflect.Type, path string) {
		for ty.Kind() == reflect.Pointer || ty.Kind() == reflect.Slice || ty.Kind() == reflect.Array || ty.Kind() == reflect.Map {
			ty = ty.Elem()
		}
		if ty.Kind() != reflect.Struct || seen[ty] {
			return
		}
		seen[ty] = true
		for _, f := range yamlFields(ty) {
			sf := ty.FieldByIndex(f.index)
			if f.name == "" {
				t.Errorf("%s.%s (under %q) has no YAML name in its tag", ty, sf.Name, path)
			}
			walk(sf.Type, join(path, f.name))
		}
	}
	walk(reflect.TypeOf(Scenario{}), "")
	if len(seen) < 5 {
		t.Errorf("walked only %d struct types of the schema", len(seen))
	}
}

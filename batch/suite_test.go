package batch

import (
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"gaitrig/rig"
	"gaitrig/scenarios"
)

func TestSourcesAndLoad(t *testing.T) {
	dir := t.TempDir()
	text, err := scenarios.BuiltinText("slope-change")
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range []string{"b.yaml", "a.yml"} {
		if err := os.WriteFile(filepath.Join(dir, f), text, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	if err := os.WriteFile(filepath.Join(dir, "notes.txt"), []byte("not a scenario"), 0o644); err != nil {
		t.Fatal(err)
	}
	got, err := Sources([]string{dir, "builtin"})
	if err != nil {
		t.Fatal(err)
	}
	var want []string
	// A folder's *.yaml and *.yml files sorted together by path (the order
	// a CI shard relies on).
	want = append(want, filepath.Join(dir, "a.yml"), filepath.Join(dir, "b.yaml"))
	for _, e := range scenarios.Library() {
		want = append(want, scenarios.BuiltinPrefix+e.Name)
	}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("Sources = %q, want %q", got, want)
	}
	empty := t.TempDir()
	for _, args := range [][]string{{filepath.Join(dir, "missing")}, {empty}} {
		if _, err := Sources(args); !errors.Is(err, rig.ErrConfig) {
			t.Errorf("Sources(%q): error %v, want a configuration error", args, err)
		}
	}

	// The two files hold the same scenario name: the second is refused.
	scs, errs := Load(got[:3])
	if len(errs) != 1 || !errors.Is(errs[0], rig.ErrConfig) || !strings.Contains(errs[0].Error(), "b.yaml: scenario name slope-change is also the name of "+filepath.Join(dir, "a.yml")) {
		t.Errorf("Load of two files with one name: errors %v", errs)
	}
	if scs[0] == nil || scs[0].Name != "slope-change" || scs[2] == nil {
		t.Errorf("Load lost a good scenario: %v", scs)
	}
	if _, errs := Load([]string{filepath.Join(dir, "notes.txt")}); len(errs) != 1 || !errors.Is(errs[0], rig.ErrConfig) {
		t.Errorf("Load of a file that is not a scenario: %v", errs)
	}
}

func TestDefaultBaselinePath(t *testing.T) {
	dir := t.TempDir()
	if p := DefaultBaselinePath([]string{dir}); p != "" {
		t.Errorf("no baseline.json yet: %q", p)
	}
	want := filepath.Join(dir, "baseline.json")
	if err := os.WriteFile(want, []byte("{}"), 0o644); err != nil {
		t.Fatal(err)
	}
	if p := DefaultBaselinePath([]string{dir, "builtin"}); p != want {
		t.Errorf("DefaultBaselinePath = %q, want %q", p, want)
	}
	if p := DefaultBaselinePath([]string{"builtin", dir}); p != "" {
		t.Errorf("only the first argument counts: got %q", p)
	}
}

func TestNewDirNeverReusesAFolder(t *testing.T) {
	root := filepath.Join(t.TempDir(), "runs")
	seen := map[string]bool{}
	for i := 0; i < 3; i++ {
		dir, err := NewDir(root, "suite")
		if err != nil {
			t.Fatal(err)
		}
		if seen[dir] || !strings.HasPrefix(filepath.Base(dir), "suite-") {
			t.Errorf("NewDir gave %s (twice, or not named suite-TIME)", dir)
		}
		seen[dir] = true
		if st, err := os.Stat(dir); err != nil || !st.IsDir() {
			t.Errorf("%s was not created: %v", dir, err)
		}
	}
}

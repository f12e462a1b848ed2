package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// compare exits 0 for runs within tolerance and 1 for a regression (a
// run that tripped against one that did not), with the page written and
// the JSON document on stdout.
func TestCompareCommand(t *testing.T) {
	root := t.TempDir()
	a, b, c := filepath.Join(root, "a"), filepath.Join(root, "b"), filepath.Join(root, "c")
	for _, args := range [][]string{
		{"run", "--quiet", "--no-report", "--dir", a, "--duration", "2", "level-demo"},
		{"run", "--quiet", "--no-report", "--dir", b, "--duration", "2", "level-demo"},
		{"run", "--quiet", "--no-report", "--dir", c, "--duration", "2", "--max-steps", "1", "level-demo"},
	} {
		run(t, args...)
	}
	page := filepath.Join(root, "ab.html")
	code, stdout, stderr := run(t, "compare", "--html", page, "--json", a, b)
	if code != 0 {
		t.Fatalf("compare of two identical runs: exit %d\n%s\n%s", code, stdout, stderr)
	}
	var res struct {
		Within     bool `json:"within_tolerances"`
		SameStart  bool `json:"same_start"`
		Divergence any  `json:"first_divergence"`
	}
	if err := json.Unmarshal([]byte(stdout), &res); err != nil {
		t.Fatalf("--json output: %v\n%s", err, stdout)
	}
	if !res.Within || !res.SameStart || res.Divergence != nil {
		t.Errorf("identical runs: %+v", res)
	}
	if b, err := os.ReadFile(page); err != nil || !strings.Contains(string(b), "not a safety certificate") {
		t.Errorf("page %s: %v", page, err)
	}
	code, stdout, _ = run(t, "compare", "--html", filepath.Join(root, "ac.html"), a, c)
	if code != 1 || !strings.Contains(stdout, "outside the suite's tolerances") || !strings.Contains(stdout, "steps 1, baseline") {
		t.Errorf("a run cut to one step against the full one: exit %d\n%s", code, stdout)
	}
	if code, _, stderr := run(t, "compare", a); code != 2 || !strings.Contains(stderr, "two run folders") {
		t.Errorf("one argument: exit %d, %q", code, stderr)
	}
	if code, _, _ := run(t, "compare", "--html", filepath.Join(root, "x.html"), a, filepath.Join(root, "missing")); code != 2 {
		t.Errorf("a missing folder: exit %d, want 2", code)
	}
}

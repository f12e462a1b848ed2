package batch

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gaitrig/internal/browsertest"
)

// TestSuitePageInChromium writes the page of a merged suite with every
// kind of verdict and checks, in the DOM the browser built, one row per
// scenario with its verdict, figures and a working relative link to its
// run's report, the counts and the caution.
func TestSuitePageInChromium(t *testing.T) {
	dir := t.TempDir()
	p99 := 812.0
	s := SuiteSummary{SchemaVersion: 1, Shards: []string{"1/2", "2/2"}, Total: 3, Caution: "A passing simulation is not a safety certificate.",
		Scenarios: []ScenarioVerdict{
			{Scenario: "a-walk", Verdict: VerdictOK, Outcome: "pass", Attempts: 1, RunFolder: filepath.Join(dir, "s1", "a-walk"),
				Figures: &Entry{Outcome: "pass", Steps: 12, MeanSpeedMPS: 0.41234, PeakFrictionUtilization: 0.5, MinNormalForceN: 80, LatencyP99US: &p99}},
			{Scenario: "b-<slip>", Verdict: VerdictRegressed, Outcome: "tripped", Attempts: 1, Quarantined: true, Regressions: []string{"outcome tripped, baseline pass"},
				Figures: &Entry{Outcome: "tripped", Steps: 3}},
			{Scenario: "c-stall", Verdict: VerdictInfrastructure, Attempts: 3, Error: "infrastructure, not the firmware: host_stall"},
		}}
	s.Failed, s.Infrastructure, s.Quarantined = count(s.Scenarios)
	if err := os.MkdirAll(filepath.Join(dir, "s1", "a-walk"), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "s1", "a-walk", "report.html"), []byte("<p>run</p>"), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := WriteSuitePage(dir, s); err != nil {
		t.Fatal(err)
	}
	doc := browsertest.DOM(t, filepath.Join(dir, SuitePageFile))
	text := browsertest.Text(doc)
	for _, want := range []string{"not a safety certificate", "0 regressed or could not run, 1 spoiled by the host", "1 quarantined and not passing", "shards 1/2, 2/2"} {
		if !strings.Contains(text, want) {
			t.Errorf("page lacks %q", want)
		}
	}
	rows := browsertest.FindAll(browsertest.FindAll(doc, "tbody")[0], "tr")
	if len(rows) != 3 {
		t.Fatalf("%d rows, want 3", len(rows))
	}
	for i, want := range []struct{ class, name, has string }{
		{"ok", "a-walk", "0.4123"}, {"regressed", "b-<slip>", "(quarantined)"}, {"infrastructure", "c-stall", "host_stall"},
	} {
		cells := browsertest.FindAll(rows[i], "td")
		if browsertest.Attr(rows[i], "class") != want.class || browsertest.Text(cells[0]) != want.name || !strings.Contains(browsertest.Text(rows[i]), want.has) {
			t.Errorf("row %d: class %q, name %q, text %q; want %+v", i, browsertest.Attr(rows[i], "class"), browsertest.Text(cells[0]), browsertest.Text(rows[i]), want)
		}
	}
	links := browsertest.FindAll(rows[0], "a")
	if len(links) != 1 {
		t.Fatal("the first row has no link to its report")
	}
	if href := browsertest.Attr(links[0], "href"); href != "s1/a-walk/report.html" {
		t.Errorf("link %q, want the run's report relative to the page", href)
	}
	if !strings.Contains(browsertest.Text(rows[0]), "812") {
		t.Errorf("first row lacks its p99 latency: %q", browsertest.Text(rows[0]))
	}
}

package batch

import (
	"bytes"
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"golang.org/x/net/html"
)

// chromiumDOM loads a file in headless Chromium and returns the DOM the
// browser built, skipping without the browser unless
// GAITRIG_REQUIRE_TOOLS=1. (report's helper is in its test files, which
// other packages cannot import; this is the same call, bounded the same
// way: its own process group, killed when the time is up.)
func chromiumDOM(t *testing.T, path string) *html.Node {
	t.Helper()
	bin, err := exec.LookPath("chromium")
	if err != nil {
		if os.Getenv("GAITRIG_REQUIRE_TOOLS") == "1" {
			t.Fatal("chromium not found (Debian package chromium) and GAITRIG_REQUIRE_TOOLS=1")
		}
		t.Skip("chromium not found: install the Debian package chromium to run the browser check")
	}
	abs, err := filepath.Abs(path)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 90*time.Second)
	defer cancel()
	cmd := exec.CommandContext(ctx, bin, "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
		"--disable-background-networking", "--disable-component-update", "--disable-sync",
		"--user-data-dir="+t.TempDir(), "--dump-dom", "file://"+abs)
	cmd.SysProcAttr = &syscall.SysProcAttr{Setpgid: true}
	cmd.Cancel = func() error { return syscall.Kill(-cmd.Process.Pid, syscall.SIGKILL) }
	cmd.WaitDelay = 5 * time.Second
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	err = cmd.Run()
	if cmd.Process != nil {
		_ = syscall.Kill(-cmd.Process.Pid, syscall.SIGKILL)
	}
	if err != nil {
		t.Fatalf("chromium: %v; stderr: %s", err, errb.String())
	}
	doc, err := html.Parse(&out)
	if err != nil {
		t.Fatal(err)
	}
	return doc
}

func findAll(n *html.Node, tag string) []*html.Node {
	var out []*html.Node
	if n.Type == html.ElementNode && n.Data == tag {
		out = append(out, n)
	}
	for c := n.FirstChild; c != nil; c = c.NextSibling {
		out = append(out, findAll(c, tag)...)
	}
	return out
}

func textIn(n *html.Node) string {
	var b strings.Builder
	var walk func(*html.Node)
	walk = func(n *html.Node) {
		if n.Type == html.TextNode {
			b.WriteString(n.Data)
		}
		for c := n.FirstChild; c != nil; c = c.NextSibling {
			walk(c)
		}
	}
	walk(n)
	return b.String()
}

func attr(n *html.Node, key string) string {
	for _, a := range n.Attr {
		if a.Key == key {
			return a.Val
		}
	}
	return ""
}

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
	doc := chromiumDOM(t, filepath.Join(dir, SuitePageFile))
	text := textIn(doc)
	for _, want := range []string{"not a safety certificate", "0 regressed or could not run, 1 spoiled by the host", "1 quarantined and not passing", "shards 1/2, 2/2"} {
		if !strings.Contains(text, want) {
			t.Errorf("page lacks %q", want)
		}
	}
	rows := findAll(findAll(doc, "tbody")[0], "tr")
	if len(rows) != 3 {
		t.Fatalf("%d rows, want 3", len(rows))
	}
	for i, want := range []struct{ class, name, has string }{
		{"ok", "a-walk", "0.4123"}, {"regressed", "b-<slip>", "(quarantined)"}, {"infrastructure", "c-stall", "host_stall"},
	} {
		cells := findAll(rows[i], "td")
		if attr(rows[i], "class") != want.class || textIn(cells[0]) != want.name || !strings.Contains(textIn(rows[i]), want.has) {
			t.Errorf("row %d: class %q, name %q, text %q; want %+v", i, attr(rows[i], "class"), textIn(cells[0]), textIn(rows[i]), want)
		}
	}
	links := findAll(rows[0], "a")
	if len(links) != 1 {
		t.Fatal("the first row has no link to its report")
	}
	if href := attr(links[0], "href"); href != "s1/a-walk/report.html" {
		t.Errorf("link %q, want the run's report relative to the page", href)
	}
	if !strings.Contains(textIn(rows[0]), "812") {
		t.Errorf("first row lacks its p99 latency: %q", textIn(rows[0]))
	}
}

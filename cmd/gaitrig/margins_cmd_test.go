package main

import (
	"encoding/json"
	"encoding/xml"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gaitrig/scenarios"
)

// TestMarginsCommand searches two axes of the demo with a lab minimum the
// firmware cannot meet: the command must name the failing margin, exit 1,
// and leave a page, JUnit XML and JSON that agree with the table.
func TestMarginsCommand(t *testing.T) {
	if testing.Short() {
		t.Skip("lockstep walks")
	}
	text, err := scenarios.BuiltinText("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	file := filepath.Join(dir, "demo-with-minima.yaml")
	text = append(text, []byte("margins:\n  axes: [added_latency, slope_up]\n  min_slope_deg: 8\n  min_added_latency_ms: 5\n")...)
	if err := os.WriteFile(file, text, 0o644); err != nil {
		t.Fatal(err)
	}
	code, out, errs := run(t, "margins", "--out", filepath.Join(dir, "runs"), "--json", file)
	if code != exitFail {
		t.Fatalf("exit %d, want %d (slope minimum missed); stderr %s", code, exitFail, errs)
	}
	var doc marginsDoc
	if err := json.Unmarshal([]byte(out), &doc); err != nil {
		t.Fatalf("JSON: %v\n%s", err, out)
	}
	if len(doc.Axes) != 2 || doc.Axes[0].Axis != "added_latency" || doc.Axes[1].Axis != "slope_up" {
		t.Fatalf("axes %+v", doc.Axes)
	}
	lat, slope := doc.Axes[0], doc.Axes[1]
	if !lat.Meets || slope.Meets || slope.Shortfall != 8-slope.Limit {
		t.Errorf("latency %g meets %v; slope %g meets %v shortfall %g", lat.Limit, lat.Meets, slope.Limit, slope.Meets, slope.Shortfall)
	}
	if !strings.Contains(doc.Caution, "not a safety certificate") {
		t.Error("no caution in the JSON")
	}
	b, err := os.ReadFile(filepath.Join(doc.Dir, "junit.xml"))
	if err != nil {
		t.Fatal(err)
	}
	var suites struct {
		Suites []struct {
			Cases []struct {
				Name    string    `xml:"name,attr"`
				Failure *struct{} `xml:"failure"`
			} `xml:"testcase"`
		} `xml:"testsuite"`
	}
	if err := xml.Unmarshal(b, &suites); err != nil || len(suites.Suites) != 1 || len(suites.Suites[0].Cases) != 2 {
		t.Fatalf("junit: %v %s", err, b)
	}
	if c := suites.Suites[0].Cases; c[0].Failure != nil || c[1].Failure == nil {
		t.Errorf("junit cases %+v: want latency passed, slope failed", c)
	}
	if _, err := os.Stat(filepath.Join(doc.Dir, "margins.html")); err != nil {
		t.Error(err)
	}
}

// TestPreflightEnvelopeNamesTheFailingMargin runs preflight on a firmware
// with less swing damping and a lab minimum friction ratio it misses: the
// verdict must be NO-GO with the friction margin named.
func TestPreflightEnvelopeNamesTheFailingMargin(t *testing.T) {
	if testing.Short() {
		t.Skip("lockstep walks")
	}
	text, err := scenarios.BuiltinText("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	file := filepath.Join(dir, "weak.yaml")
	text = []byte(strings.Replace(string(text), "  mode: walk\n", "  mode: walk\n  settings:\n    swing_kd: 3\n", 1))
	text = append(text, []byte("margins:\n  min_friction_ratio: 3\n")...)
	if err := os.WriteFile(file, text, 0o644); err != nil {
		t.Fatal(err)
	}
	code, out, errs := run(t, "preflight", "--out", filepath.Join(dir, "runs"), "--scenario", file)
	if code != exitFail || !strings.Contains(out, "NO-GO: margin friction") || !strings.Contains(out, "verdict: NO-GO") {
		t.Errorf("exit %d; stdout:\n%s\nstderr:\n%s", code, out, errs)
	}
}

func TestStabilityCommand(t *testing.T) {
	if testing.Short() {
		t.Skip("lockstep walks")
	}
	code, out, errs := run(t, "stability", "--out", t.TempDir(), "--json", "--steps", "20", "--push", "-1", "--step-down", "-1", "level-demo")
	if code != exitPass {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var rep struct {
		SpectralRadius float64 `json:"spectral_radius"`
		Eigenvalues    []struct {
			Modulus float64 `json:"modulus"`
		} `json:"eigenvalues"`
		Caution string `json:"caution"`
		Dir     string `json:"run_dir"`
	}
	if err := json.Unmarshal([]byte(out), &rep); err != nil {
		t.Fatal(err)
	}
	if len(rep.Eigenvalues) != 5 || rep.SpectralRadius != rep.Eigenvalues[0].Modulus || !strings.Contains(rep.Caution, "not a safety certificate") {
		t.Errorf("%s", out)
	}
	// The page, JUnit XML and JSON in the estimate's folder (the parent
	// of the run folder).
	dir := filepath.Dir(rep.Dir)
	for _, f := range []string{"stability.html", "junit.xml", "stability.json"} {
		if _, err := os.Stat(filepath.Join(dir, f)); err != nil {
			t.Error(err)
		}
	}
	b, err := os.ReadFile(filepath.Join(dir, "junit.xml"))
	if err != nil {
		t.Fatal(err)
	}
	var suites struct {
		Suites []struct {
			Cases []struct {
				Name    string    `xml:"name,attr"`
				Failure *struct{} `xml:"failure"`
			} `xml:"testcase"`
		} `xml:"testsuite"`
	}
	if err := xml.Unmarshal(b, &suites); err != nil || len(suites.Suites) != 1 || len(suites.Suites[0].Cases) != 1 ||
		suites.Suites[0].Cases[0].Name != "spectral_radius" || suites.Suites[0].Cases[0].Failure != nil {
		t.Errorf("junit: %v %s", err, b)
	}
}

package batch

import (
	"bytes"
	"encoding/xml"
	"math"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"gaitrig/internal/browsertest"
	"gaitrig/record"
	"gaitrig/report"
)

// TestStabilityPageInChromium writes the page of an unstable estimate (a
// pair inside the unit circle, one real eigenvalue outside it), loads it
// in Chromium and checks in the DOM the browser built: the caution, the
// verdict, each eigenvalue drawn where its value puts it (worked out here
// from the plot's stated scale: 300 px for ±1.25, centre at 150 px), the
// unit circle's radius, the table, the residual warning, and the relative
// links to the runs.
func TestStabilityPageInChromium(t *testing.T) {
	dir := t.TempDir()
	r := StabilityReport{Scenario: "wobbly", Coordinates: []string{"stance", "rate"}, Stable: false,
		Eigenvalues: []Eigen{
			{Re: 1.1, Im: 0, Modulus: 1.1, ModulusLow: 1.05, ModulusHigh: 1.16},
			{Re: 0.5, Im: 0.3, Modulus: math.Hypot(0.5, 0.3), ModulusLow: 0.5, ModulusHigh: 0.62},
			{Re: 0.5, Im: -0.3, Modulus: math.Hypot(0.5, 0.3), ModulusLow: 0.5, ModulusHigh: 0.62},
		},
		SpectralRadius: 1.1, RadiusLow: 1.05, RadiusHigh: 1.16, Residual: 0.4, ResidualWarning: "the residual is large: the firmware keeps state",
		DecaySteps: -1, Pairs: 40, Size: 0.003, Dir: filepath.Join(dir, "wobbly-stability"), Caution: record.Caution,
		GSN: []GSN{{Disturbance: "push", Size: 0.5, Unit: "N·s", Norm: math.NaN(), StepTime: math.NaN(), StepLength: math.NaN(), Error: "the disturbed run fell",
			Dir: filepath.Join(dir, "wobbly-push"), ReferenceDir: filepath.Join(dir, "wobbly-stability")}},
	}
	if err := WriteStabilityPage(dir, r); err != nil {
		t.Fatal(err)
	}
	doc := browsertest.DOM(t, filepath.Join(dir, StabilityPageFile))
	text := browsertest.Text(doc)
	for _, want := range []string{"not a safety certificate", "UNSTABLE", "spectral radius 1.1000 (95 % bootstrap interval 1.0500 … 1.1600)",
		"does not decay by 90 %", "the firmware keeps state", "the disturbed run fell", "stance, rate"} {
		if !strings.Contains(text, want) {
			t.Errorf("page lacks %q", want)
		}
	}
	px := func(v float64) float64 { return 150 + 150*v/1.25 }
	var eig [][2]float64
	unit := -1.0
	for _, c := range browsertest.FindAll(doc, "circle") {
		cx, _ := strconv.ParseFloat(browsertest.Attr(c, "cx"), 64)
		cy, _ := strconv.ParseFloat(browsertest.Attr(c, "cy"), 64)
		switch {
		case browsertest.Attr(c, "class") == "eigenvalue":
			eig = append(eig, [2]float64{cx, cy})
		case browsertest.Attr(c, "id") == "unit-circle":
			unit, _ = strconv.ParseFloat(browsertest.Attr(c, "r"), 64)
		}
	}
	if math.Abs(unit-120) > 0.01 {
		t.Errorf("unit circle radius %g px, want 120 (1 of 1.25 on 150 px)", unit)
	}
	if len(eig) != 3 {
		t.Fatalf("%d eigenvalues drawn, want 3", len(eig))
	}
	for i, e := range r.Eigenvalues {
		if math.Abs(eig[i][0]-px(e.Re)) > 0.01 || math.Abs(eig[i][1]-(300-px(e.Im))) > 0.01 {
			t.Errorf("eigenvalue %v drawn at %v, want (%g, %g)", e, eig[i], px(e.Re), 300-px(e.Im))
		}
	}
	rows := browsertest.FindAll(browsertest.FindAll(doc, "tbody")[0], "tr")
	if len(rows) != 3 || !strings.Contains(browsertest.Text(rows[1]), "0.5831") {
		t.Errorf("eigenvalue table: %d rows", len(rows))
	}
	var hrefs []string
	for _, a := range browsertest.FindAll(doc, "a") {
		hrefs = append(hrefs, browsertest.Attr(a, "href"))
	}
	if strings.Join(hrefs, " ") != "wobbly-stability/report.html wobbly-push/report.html wobbly-stability/report.html" {
		t.Errorf("links %v: want the runs' reports relative to the page", hrefs)
	}
}

// TestStabilitySuiteFailsAnUnstableGait: the JUnit suite fails the
// spectral radius case exactly when the gait is not stable, and a gait
// sensitivity case when its run gave no norm.
func TestStabilitySuiteFailsAnUnstableGait(t *testing.T) {
	for _, tc := range []struct {
		stable   bool
		gsnErr   string
		failures int
	}{{true, "", 0}, {false, "", 1}, {true, "the disturbed run fell", 1}, {false, "the disturbed run fell", 2}} {
		r := StabilityReport{Scenario: "s", Stable: tc.stable, SpectralRadius: 0.7, GSN: []GSN{{Disturbance: "push", Size: 0.5, Unit: "N·s", Error: tc.gsnErr}}}
		if !tc.stable {
			r.SpectralRadius = 1.2
		}
		var b bytes.Buffer
		if err := report.WriteJUnit(&b, StabilitySuite(r)); err != nil {
			t.Fatal(err)
		}
		var suites struct {
			Suites []struct {
				Failures int `xml:"failures,attr"`
				Cases    []struct {
					Name string `xml:"name,attr"`
				} `xml:"testcase"`
			} `xml:"testsuite"`
		}
		if err := xml.Unmarshal(b.Bytes(), &suites); err != nil || len(suites.Suites) != 1 {
			t.Fatalf("%v %s", err, b.String())
		}
		if s := suites.Suites[0]; s.Failures != tc.failures || len(s.Cases) != 2 || s.Cases[0].Name != "spectral_radius" || s.Cases[1].Name != "gait_sensitivity_push" {
			t.Errorf("stable %v, GSN error %q: %s", tc.stable, tc.gsnErr, b.String())
		}
	}
}

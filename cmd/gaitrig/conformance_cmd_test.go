package main

import (
	"bytes"
	"encoding/json"
	"encoding/xml"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// gaitrig conformance against the built-in firmware: exit 0, a JSON report
// with every check, and a JUnit file that parses with one case per check.
// A link that does not parse exits 2.
func TestConformanceCommand(t *testing.T) {
	junit := filepath.Join(t.TempDir(), "conformance.xml")
	var out, errb bytes.Buffer
	code := dispatch([]string{"conformance", "--link", "builtin", "--samples", "50", "--json", "--junit", junit}, &out, &errb)
	if code != exitPass {
		t.Fatalf("exit %d, want %d\nstdout:\n%s\nstderr:\n%s", code, exitPass, out.String(), errb.String())
	}
	var rep struct {
		Passed bool `json:"passed"`
		Checks []struct {
			Name, Status string
		} `json:"checks"`
		RoundTrip struct {
			Count int `json:"count"`
		} `json:"round_trip_us"`
	}
	if err := json.Unmarshal(out.Bytes(), &rep); err != nil {
		t.Fatalf("--json output does not parse: %v\n%s", err, out.String())
	}
	if !rep.Passed || len(rep.Checks) != 13 || rep.RoundTrip.Count != 50 {
		t.Errorf("report: passed %v, %d checks, %d round trips; want true, 13, 50", rep.Passed, len(rep.Checks), rep.RoundTrip.Count)
	}
	raw, err := os.ReadFile(junit)
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Suites []struct {
			Tests int `xml:"tests,attr"`
		} `xml:"testsuite"`
	}
	if err := xml.Unmarshal(raw, &doc); err != nil || len(doc.Suites) != 1 || doc.Suites[0].Tests != 13 {
		t.Errorf("JUnit file: %v, %+v; want one suite of 13 cases", err, doc.Suites)
	}

	out.Reset()
	errb.Reset()
	if code := dispatch([]string{"conformance", "--link", "nonsense"}, &out, &errb); code != exitConfig || !strings.Contains(errb.String(), "unknown link") {
		t.Errorf("an unknown link: exit %d, stderr %q; want %d and a message naming it", code, errb.String(), exitConfig)
	}
}

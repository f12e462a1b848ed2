package report_test

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"golang.org/x/net/html"

	"gaitrig/report"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// TestKneedReportInChromium runs the passive kneed built-in walker for a
// few steps through the rig, writes its report and loads it in headless
// Chromium: the knee-lock plot is on the page with its zero line, and the
// stick figures draw a knee on each leg.
func TestKneedReportInChromium(t *testing.T) {
	bin := report.FindChromium(t)
	s, err := scenarios.LoadBuiltin("passive-kneed-downhill")
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "run")
	if _, err := rig.Run(context.Background(), s, rig.Options{RunDir: dir, MaxSteps: 6}); err != nil {
		t.Fatal(err)
	}
	if err := report.WriteHTML(dir); err != nil {
		t.Fatal(err)
	}
	page, err := os.ReadFile(filepath.Join(dir, report.HTMLFile))
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(page), "zero: below it the stop would have to pull") {
		t.Error("the knee-lock plot has no zero line in its legend")
	}
	abs, err := filepath.Abs(filepath.Join(dir, report.HTMLFile))
	if err != nil {
		t.Fatal(err)
	}
	out := report.RunChromium(t, bin, 90*time.Second, "--dump-dom", "file://"+abs)
	doc, err := html.Parse(bytes.NewReader(out))
	if err != nil {
		t.Fatalf("dumped DOM does not parse: %v", err)
	}
	svgs := map[string]*html.Node{}
	var walk func(n *html.Node)
	walk = func(n *html.Node) {
		if n.Type == html.ElementNode && n.Data == "svg" {
			for _, a := range n.Attr {
				if a.Key == "id" {
					svgs[a.Val] = n
				}
			}
		}
		for c := n.FirstChild; c != nil; c = c.NextSibling {
			walk(c)
		}
	}
	walk(doc)
	knee := svgs["plot-knee-lock"]
	if knee == nil {
		t.Fatalf("no plot-knee-lock in the browser DOM; plots: %v", keys(svgs))
	}
	if n := count(knee, "path"); n < 5 {
		t.Errorf("plot-knee-lock has %d paths: not drawn", n)
	}
	stick := svgs["plot-heel-strikes"]
	if stick == nil {
		t.Fatal("no heel-strike stick figures in the browser DOM")
	}
	// A kneed leg adds a thigh line and a knee dot (two paths) to the
	// figure: the six figures of this run have 61 paths with knees drawn
	// and 37 without (measured when this test was written), so 54 tells
	// them apart.
	if n := count(stick, "path"); n < 54 {
		t.Errorf("stick figures have %d paths; six figures with knees drawn have at least 54", n)
	}
}

func keys(m map[string]*html.Node) []string {
	var out []string
	for k := range m {
		out = append(out, k)
	}
	return out
}

func count(n *html.Node, tag string) int {
	c := 0
	if n.Type == html.ElementNode && n.Data == tag {
		c++
	}
	for k := n.FirstChild; k != nil; k = k.NextSibling {
		c += count(k, tag)
	}
	return c
}

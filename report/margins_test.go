package report

import (
	"bytes"
	"math"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"golang.org/x/net/html"
)

func marginsFixture() MarginsPage {
	return MarginsPage{Scenario: "demo", Dir: "/tmp/x", Axes: []MarginAxis{
		{Name: "friction", Unit: "× μ_s", Limit: 0.31, Required: 0.5, Reached: true, LastPassDir: "/tmp/x/a", FirstFailDir: "/tmp/x/b", FailReason: "lift_off",
			Points: []MarginPoint{{1, 30, true}, {0.81, 30, true}, {0.62, 30, true}, {0.43, 30, true}, {0.24, 2, false}, {0.31, 30, true}, {0.30, 2, false}}},
		{Name: "added_latency", Unit: "ms", Limit: 40, Required: math.NaN(),
			Points: []MarginPoint{{0, 30, true}, {20, 30, true}, {40, 30, true}}},
	}}
}

// TestMarginsPageInChromium loads the margins page in headless Chromium and
// checks that the browser built one drawn survival plot per axis and shows
// the caution.
func TestMarginsPageInChromium(t *testing.T) {
	bin := findChromium(t)
	path := filepath.Join(t.TempDir(), MarginsHTMLFile)
	if err := WriteMarginsHTML(path, marginsFixture()); err != nil {
		t.Fatal(err)
	}
	out := runChromium(t, bin, 90*time.Second, "--dump-dom", "file://"+path)
	doc, err := html.Parse(bytes.NewReader(out))
	if err != nil {
		t.Fatal(err)
	}
	ids := map[string]bool{}
	var walk func(n *html.Node)
	walk = func(n *html.Node) {
		if n.Type == html.ElementNode && n.Data == "svg" {
			for _, a := range n.Attr {
				if a.Key == "id" {
					ids[a.Val] = true
					if countElements(n, "path") < 3 {
						t.Errorf("#%s has almost no drawing", a.Val)
					}
				}
			}
		}
		for c := n.FirstChild; c != nil; c = c.NextSibling {
			walk(c)
		}
	}
	walk(doc)
	if !ids["margin-0"] || !ids["margin-1"] || len(ids) != 2 {
		t.Errorf("plots in the browser DOM: %v, want margin-0 and margin-1", ids)
	}
	text := textOf(doc)
	for _, want := range []string{"not a safety certificate", "/tmp/x/b", "passed the whole range"} {
		if !strings.Contains(text, want) {
			t.Errorf("the page does not say %q", want)
		}
	}
}

func TestMarginsPageSaysNotMonotone(t *testing.T) {
	pg := marginsFixture()
	pg.Axes[0].NotMonotone = true
	var b bytes.Buffer
	if err := RenderMargins(&b, pg); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(b.String(), "NOT MONOTONE") || strings.Count(b.String(), "<svg id=") != 2 {
		t.Error("page without the not-monotone flag or without two plots")
	}
}

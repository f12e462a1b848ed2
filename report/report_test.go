package report

import (
	"bytes"
	"encoding/xml"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"golang.org/x/net/html"

	"gaitrig/record"
)

// plotIDs are the ids of the SVG plots every report carries.
var plotIDs = []string{
	"plot-joint-angles", "plot-joint-rates", "plot-torques", "plot-hip-height", "plot-hip-speed", "plot-energy",
	"plot-force-left", "plot-force-right", "plot-cone-left", "plot-cone-right",
	"plot-utilization", "plot-cop", "plot-phase-0", "plot-alarms", "plot-heel-strikes",
}

// latencyPlotID and latencyCDFID are the plots a run with measured latency
// adds; torsoPlotID the plot a walker with a torso adds.
const (
	latencyPlotID = "plot-latency"
	latencyCDFID  = "plot-latency-cdf"
	latencyTailID = "plot-latency-tail"
	torsoPlotID   = "plot-torso-pitch"
)

// writeSynthFolder writes the synthetic run r into a run folder with the
// real record writer. close=false leaves it as a killed run leaves it: no
// summary.json.
func writeSynthFolder(tb testing.TB, dir string, r synthRun, close bool) {
	tb.Helper()
	w, err := record.Create(dir, r.m)
	if err != nil {
		tb.Fatal(err)
	}
	ev, st := 0, 0
	for i := range r.ticks {
		tk := &r.ticks[i]
		for ev < len(r.events) && r.events[ev].Tick <= tk.Index {
			if err := w.Event(r.events[ev]); err != nil {
				tb.Fatal(err)
			}
			ev++
		}
		for st < len(r.steps) && r.steps[st].EndS <= tk.T {
			if err := w.Step(r.steps[st]); err != nil {
				tb.Fatal(err)
			}
			st++
		}
		if err := w.Tick(tk); err != nil {
			tb.Fatal(err)
		}
	}
	for ; ev < len(r.events); ev++ {
		if err := w.Event(r.events[ev]); err != nil {
			tb.Fatal(err)
		}
	}
	for ; st < len(r.steps); st++ {
		if err := w.Step(r.steps[st]); err != nil {
			tb.Fatal(err)
		}
	}
	if close {
		if err := w.Close(r.sum); err != nil {
			tb.Fatal(err)
		}
		return
	}
	if err := w.Flush(); err != nil {
		tb.Fatal(err)
	}
	// Release the files without writing a summary, as a killed run would.
	// (The writer has no "abandon" call; closing and deleting the summary
	// gives the same folder.)
	if err := w.Close(r.sum); err != nil {
		tb.Fatal(err)
	}
	if err := os.Remove(filepath.Join(dir, record.SummaryFile)); err != nil {
		tb.Fatal(err)
	}
}

// parsed is a report read back with an HTML parser.
type parsed struct {
	raw   string
	doc   *html.Node
	byID  map[string]*html.Node
	texts map[string]string // text content by id
}

// renderAndParse writes the report of the run folder dir and parses the
// page it wrote.
func renderAndParse(t *testing.T, dir string) parsed {
	t.Helper()
	if err := WriteHTML(dir); err != nil {
		t.Fatal(err)
	}
	raw, err := os.ReadFile(filepath.Join(dir, HTMLFile))
	if err != nil {
		t.Fatal(err)
	}
	return parseReport(t, raw)
}

// parseReport parses a report page and indexes its elements by id, and
// fails the test where the page repeats an id or needs anything from
// outside itself (a script, an image, an outside link).
func parseReport(t *testing.T, raw []byte) parsed {
	t.Helper()
	doc, err := html.Parse(bytes.NewReader(raw))
	if err != nil {
		t.Fatalf("report does not parse as HTML: %v", err)
	}
	p := parsed{raw: string(raw), doc: doc, byID: map[string]*html.Node{}, texts: map[string]string{}}
	var walk func(n *html.Node)
	walk = func(n *html.Node) {
		if n.Type == html.ElementNode {
			for _, a := range n.Attr {
				if a.Key == "id" {
					if _, dup := p.byID[a.Val]; dup {
						t.Errorf("duplicate id %q", a.Val)
					}
					p.byID[a.Val] = n
					p.texts[a.Val] = textOf(n)
				}
				if (a.Key == "src" || a.Key == "href" || a.Key == "xlink:href") && !strings.HasPrefix(a.Val, "#") {
					t.Errorf("external reference <%s %s=%q>: the report must be self-contained", n.Data, a.Key, a.Val)
				}
			}
			switch n.Data {
			case "script", "link", "iframe", "img":
				t.Errorf("report has a <%s> element; it must need no scripts or outside files", n.Data)
			}
		}
		for c := n.FirstChild; c != nil; c = c.NextSibling {
			walk(c)
		}
	}
	walk(doc)
	return p
}

func textOf(n *html.Node) string {
	var b strings.Builder
	var walk func(n *html.Node)
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

// countElements counts element descendants of n with the given tag.
func countElements(n *html.Node, tag string) int {
	k := 0
	for c := n.FirstChild; c != nil; c = c.NextSibling {
		if c.Type == html.ElementNode && c.Data == tag {
			k++
		}
		k += countElements(c, tag)
	}
	return k
}

var svgPart = regexp.MustCompile(`(?s)<svg id="[^"]*".*?</svg>`)

// checkPlots checks every plot is there, is an <svg> with drawn content,
// and that each inline SVG part is well-formed XML on its own; extra names
// plots this report must have beyond the usual ones.
func checkPlots(t *testing.T, p parsed, extra ...string) {
	t.Helper()
	ids := append(append([]string{}, plotIDs...), extra...)
	for _, id := range ids {
		n, ok := p.byID[id]
		if !ok {
			t.Errorf("plot %s missing", id)
			continue
		}
		if n.Data != "svg" {
			t.Errorf("#%s is <%s>, want <svg>", id, n.Data)
		}
		if paths := countElements(n, "path"); paths < 3 {
			t.Errorf("#%s has %d <path> elements; a drawn plot has axes, ticks and data", id, paths)
		}
		if txt := countElements(n, "text"); txt < 2 {
			t.Errorf("#%s has %d <text> elements; want a title and axis labels", id, txt)
		}
	}
	parts := svgPart.FindAllString(p.raw, -1)
	if len(parts) != len(ids) {
		t.Errorf("found %d inline SVG parts, want %d", len(parts), len(ids))
	}
	for i, s := range parts {
		if strings.Contains(s, "NaN") || strings.Contains(s, "Inf") {
			t.Errorf("SVG part %d has a NaN or Inf coordinate", i)
		}
		dec := xml.NewDecoder(strings.NewReader(s))
		for {
			_, err := dec.Token()
			if errors.Is(err, io.EOF) {
				break
			}
			if err != nil {
				t.Errorf("SVG part %d is not well-formed XML: %v", i, err)
				break
			}
		}
	}
}

func TestWriteHTMLFromRunFolder(t *testing.T) {
	tests := []struct {
		name        string
		opts        synthOpts
		wantOutcome string
		wantFail    int // failing criteria rows
		wantThinned bool
		edit        func(r *synthRun)
		wantExtra   []string
	}{
		{name: "low-friction patch fails the friction ceiling", opts: synthOpts{durationS: 8, hz: 1000, patchMu: 0.15}, wantOutcome: "fail", wantFail: 1, wantThinned: true},
		{name: "good ground passes, with torso", opts: synthOpts{durationS: 3, hz: 500, patchMu: 0.6, withTorso: true}, wantOutcome: "pass", wantFail: 0, wantThinned: false, wantExtra: []string{torsoPlotID}},
		{
			name: "wall-clock run adds the latency plot", opts: synthOpts{durationS: 4, hz: 1000, patchMu: 0.6}, wantOutcome: "pass", wantThinned: true,
			edit: func(r *synthRun) {
				r.m.Clock = "wallclock"
				for i := range r.ticks {
					if i%3 != 2 { // every third tick holds the last command
						r.ticks[i].LatencyUS = 90 + float64(i%17)
					}
				}
				r.sum.LatencyUS = &record.Latency{P50: 98, P99: 106, Max: 106}
			},
			wantExtra: []string{latencyPlotID, latencyCDFID, latencyTailID},
		},
		{
			name: "markup in names is shown as text", opts: synthOpts{durationS: 2, hz: 500, patchMu: 0.15}, wantOutcome: "fail", wantFail: 1, wantThinned: false,
			edit: func(r *synthRun) {
				r.m.Scenario = `<script>alert("x")</script>`
				r.m.JointNames = []string{`hip <&> "joint"`}
				r.m.Greeting.Name = `fw<img src=x>`
				for i := range r.events {
					r.events[i].Kind = `slip<b>`
				}
			},
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			dir := filepath.Join(t.TempDir(), "run")
			r := makeSynthRun(tc.opts)
			if tc.edit != nil {
				tc.edit(&r)
			}
			writeSynthFolder(t, dir, r, true)
			p := renderAndParse(t, dir)
			checkPlots(t, p, tc.wantExtra...)
			if _, ok := p.byID["incomplete"]; ok {
				t.Errorf("a complete run folder is reported incomplete: %q", p.texts["incomplete"])
			}

			if got := strings.TrimSpace(p.texts["outcome"]); got != tc.wantOutcome {
				t.Errorf("outcome %q, want %q", got, tc.wantOutcome)
			}
			caution := p.texts["caution"]
			for _, w := range []string{"not a safety certificate", "safety procedure", "fall-arrest harness or gantry", "hardware e-stop", "local rules", "qualified staff"} {
				if !strings.Contains(caution, w) {
					t.Errorf("caution lacks %q: %q", w, caution)
				}
			}
			ident := p.texts["run-identity"]
			for _, w := range []string{r.m.Scenario, r.m.ScenarioHash, r.m.Greeting.Name + " build " + r.m.Greeting.Build} {
				if !strings.Contains(ident, w) {
					t.Errorf("run identity lacks %q: %q", w, ident)
				}
			}
			crit := p.byID["criteria"]
			if crit == nil {
				t.Fatal("no criteria table")
			}
			if rows := countElements(crit, "tr") - 1; rows != len(r.sum.Criteria) {
				t.Errorf("criteria table has %d rows, want %d", rows, len(r.sum.Criteria))
			}
			if fails := strings.Count(p.texts["criteria"], "FAIL"); fails != tc.wantFail {
				t.Errorf("criteria table shows %d FAIL, want %d", fails, tc.wantFail)
			}
			steps := p.byID["steps"]
			if steps == nil {
				t.Fatal("no steps table")
			}
			if rows := countElements(steps, "tr") - 1; rows != len(r.steps) || rows == 0 {
				t.Errorf("steps table has %d rows, want %d (> 0)", rows, len(r.steps))
			}
			cap := p.texts["fig-plot-utilization"]
			if tc.wantThinned != strings.Contains(cap, "Thinned for drawing") {
				t.Errorf("utilization caption %q: thinned=%v wanted", cap, tc.wantThinned)
			}
			if !strings.Contains(p.texts["fig-plot-heel-strikes"], "heel strikes shown") {
				t.Errorf("heel-strike caption missing its count: %q", p.texts["fig-plot-heel-strikes"])
			}
			alarms := 0
			for _, e := range r.events {
				if e.Severity != record.Info {
					alarms++
				}
			}
			if log := p.byID["alarm-log"]; log == nil {
				t.Error("no alarm log")
			} else if rows := countElements(log, "tr"); alarms > 0 && rows-1 != alarms {
				t.Errorf("alarm log has %d rows, want %d", rows-1, alarms)
			}
			if !strings.Contains(p.texts["scenario-text"], r.m.ScenarioText) {
				t.Error("scenario text not in the report")
			}
			if !strings.Contains(p.texts["plot-joint-angles"], r.m.JointNames[0]) {
				t.Errorf("joint name %q not in the angle plot's legend", r.m.JointNames[0])
			}
			if tc.opts.patchMu < 0.3 && !strings.Contains(p.texts["plot-alarms"], "slip") {
				t.Errorf("alarm timeline has no slip row")
			}
		})
	}
}

// TestLongRunReportStaysSmall checks the decimation keeps a 60 s, 1 kHz
// run's report within a size a browser opens at once.
func TestLongRunReportStaysSmall(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "run")
	writeSynthFolder(t, dir, makeSynthRun(synthOpts{durationS: 60, hz: 1000, patchMu: 0.15}), true)
	if err := WriteHTML(dir); err != nil {
		t.Fatal(err)
	}
	fi, err := os.Stat(filepath.Join(dir, HTMLFile))
	if err != nil {
		t.Fatal(err)
	}
	tele, err := os.Stat(filepath.Join(dir, record.TelemetryFile))
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("report %d bytes from %d bytes of telemetry", fi.Size(), tele.Size())
	if fi.Size() > 3<<20 {
		t.Errorf("report is %d bytes; decimation should keep it under 3 MiB", fi.Size())
	}
	raw, _ := os.ReadFile(filepath.Join(dir, HTMLFile))
	p := parseReport(t, raw)
	checkPlots(t, p)
	if c := p.texts["fig-plot-heel-strikes"]; !strings.Contains(c, "40 of 109 heel strikes shown, evenly spaced") {
		t.Errorf("heel-strike caption %q: want 40 of 109 shown", c)
	}
}

func TestWriteHTMLBadFolders(t *testing.T) {
	good := makeSynthRun(synthOpts{durationS: 2, hz: 500, patchMu: 0.15})
	tests := []struct {
		name      string
		make      func(t *testing.T, dir string)
		wantErr   string   // non-empty: WriteHTML must fail with this in the message
		wantNotes []string // otherwise: the report must say these
	}{
		{
			name:    "folder does not exist",
			make:    func(t *testing.T, dir string) {},
			wantErr: "cannot read run folder",
		},
		{
			name: "folder without manifest",
			make: func(t *testing.T, dir string) {
				if err := os.MkdirAll(dir, 0o755); err != nil {
					t.Fatal(err)
				}
			},
			wantErr: "manifest.json",
		},
		{
			name: "killed run: no summary, last telemetry row cut",
			make: func(t *testing.T, dir string) {
				writeSynthFolder(t, dir, good, false)
				path := filepath.Join(dir, record.TelemetryFile)
				b, err := os.ReadFile(path)
				if err != nil {
					t.Fatal(err)
				}
				if err := os.WriteFile(path, b[:len(b)-17], 0o644); err != nil {
					t.Fatal(err)
				}
			},
			wantNotes: []string{"summary.json is missing", "last telemetry row was cut off"},
		},
		{
			name: "telemetry file deleted",
			make: func(t *testing.T, dir string) {
				writeSynthFolder(t, dir, good, true)
				if err := os.Remove(filepath.Join(dir, record.TelemetryFile)); err != nil {
					t.Fatal(err)
				}
			},
			wantNotes: []string{"Telemetry could not be read"},
		},
		{
			name: "garbage row in the middle of the telemetry",
			make: func(t *testing.T, dir string) {
				writeSynthFolder(t, dir, good, true)
				path := filepath.Join(dir, record.TelemetryFile)
				b, err := os.ReadFile(path)
				if err != nil {
					t.Fatal(err)
				}
				lines := strings.SplitAfter(string(b), "\n")
				lines[300] = "this,is,not,a,row\n"
				if err := os.WriteFile(path, []byte(strings.Join(lines, "")), 0o644); err != nil {
					t.Fatal(err)
				}
			},
			wantNotes: []string{"Telemetry stops at a bad row", "telemetry.csv:301"},
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			dir := filepath.Join(t.TempDir(), "run")
			tc.make(t, dir)
			err := WriteHTML(dir)
			if tc.wantErr != "" {
				if err == nil || !strings.Contains(err.Error(), tc.wantErr) || !strings.Contains(err.Error(), dir) {
					t.Fatalf("got error %v, want one naming %s and %q", err, dir, tc.wantErr)
				}
				if _, serr := os.Stat(filepath.Join(dir, HTMLFile)); serr == nil {
					t.Error("a report was written for an unreadable folder")
				}
				return
			}
			if err != nil {
				t.Fatalf("a damaged run should still get a report: %v", err)
			}
			raw, err := os.ReadFile(filepath.Join(dir, HTMLFile))
			if err != nil {
				t.Fatal(err)
			}
			p := parseReport(t, raw)
			checkPlots(t, p)
			warn := p.texts["incomplete"]
			for _, w := range tc.wantNotes {
				if !strings.Contains(warn, w) {
					t.Errorf("the incomplete-folder box does not say %q: %q", w, warn)
				}
			}
			if !strings.Contains(p.texts["caution"], "not a safety certificate") {
				t.Error("caution missing from a damaged run's report")
			}
			// Nothing is lost: the run's own files are untouched.
			for _, f := range []string{record.ManifestFile, record.EventsFile, record.StepsFile} {
				if _, err := os.Stat(filepath.Join(dir, f)); err != nil {
					t.Errorf("%s gone after writing the report: %v", f, err)
				}
			}
		})
	}
}

func TestNilRun(t *testing.T) {
	if err := Render(io.Discard, nil); err == nil {
		t.Error("Render(nil) gave no error")
	}
	s := RunSuite(nil)
	if len(s.Cases) != 1 || s.Cases[0].Error == "" {
		t.Errorf("RunSuite(nil) = %+v, want one case in error", s)
	}
}

func TestRunJUnit(t *testing.T) {
	tests := []struct {
		name          string
		opts          synthOpts
		edit          func(s *record.Summary)
		close         bool
		wantCases     int
		wantFailures  int
		wantInMessage string
	}{
		{name: "failing criterion", opts: synthOpts{durationS: 8, hz: 250, patchMu: 0.15}, close: true, wantCases: 3, wantFailures: 1, wantInMessage: "criterion max_friction_utilization not met"},
		{name: "all pass", opts: synthOpts{durationS: 3, hz: 250, patchMu: 0.6}, close: true, wantCases: 3, wantFailures: 0},
		{name: "tripped with criteria met", opts: synthOpts{durationS: 3, hz: 250, patchMu: 0.6}, close: true,
			edit:      func(s *record.Summary) { s.Outcome = record.Tripped; s.Reason = "watchdog: no command for 50 ms" },
			wantCases: 4, wantFailures: 1, wantInMessage: "watchdog"},
		{name: "no criteria recorded", opts: synthOpts{durationS: 1, hz: 250, patchMu: 0.6}, close: true,
			edit:      func(s *record.Summary) { s.Criteria = nil; s.Outcome = record.Pass },
			wantCases: 1, wantFailures: 0},
		{name: "killed run", opts: synthOpts{durationS: 1, hz: 250, patchMu: 0.6}, close: false, wantCases: 1, wantFailures: 1, wantInMessage: "did not finish"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			dir := filepath.Join(t.TempDir(), "run")
			r := makeSynthRun(tc.opts)
			if tc.edit != nil {
				tc.edit(&r.sum)
			}
			writeSynthFolder(t, dir, r, tc.close)
			if err := WriteRunJUnit(dir); err != nil {
				t.Fatal(err)
			}
			raw, err := os.ReadFile(filepath.Join(dir, JUnitFile))
			if err != nil {
				t.Fatal(err)
			}
			var doc xmlTestSuites
			if err := xml.Unmarshal(raw, &doc); err != nil {
				t.Fatalf("junit.xml does not parse: %v", err)
			}
			if len(doc.Suites) != 1 {
				t.Fatalf("%d suites, want 1", len(doc.Suites))
			}
			s := doc.Suites[0]
			fails := 0
			var msgs []string
			for _, c := range s.Cases {
				if c.Failure != nil {
					fails++
					msgs = append(msgs, c.Failure.Message)
				}
			}
			if len(s.Cases) != tc.wantCases || fails != tc.wantFailures || doc.Failures != fails || doc.Tests != len(s.Cases) {
				t.Errorf("cases=%d failures=%d (totals tests=%d failures=%d), want %d cases %d failures",
					len(s.Cases), fails, doc.Tests, doc.Failures, tc.wantCases, tc.wantFailures)
			}
			if tc.wantInMessage != "" && !strings.Contains(strings.Join(msgs, "\n"), tc.wantInMessage) {
				t.Errorf("failure messages %q lack %q", msgs, tc.wantInMessage)
			}
		})
	}
	if err := WriteRunJUnit(filepath.Join(t.TempDir(), "absent")); err == nil || !strings.Contains(err.Error(), "cannot read run folder") {
		t.Errorf("missing folder: got %v", err)
	}
}

// BenchmarkRender60s renders the report of a synthetic 60 s, 1 kHz run
// (60 000 telemetry rows streamed from the folder each time).
func BenchmarkRender60s(b *testing.B) {
	dir := filepath.Join(b.TempDir(), "run")
	writeSynthFolder(b, dir, makeSynthRun(synthOpts{durationS: 60, hz: 1000, patchMu: 0.15}), true)
	run, err := record.Open(dir)
	if err != nil {
		b.Fatal(err)
	}
	var size int
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		var buf bytes.Buffer
		if err := Render(&buf, run); err != nil {
			b.Fatal(err)
		}
		size = buf.Len()
	}
	b.ReportMetric(float64(size), "html-bytes")
}

// TestNonFiniteValues renders a run whose numbers went bad (a plant that
// blew up): NaN and Inf must not reach the SVG, and nothing is dropped from
// the tables.
func TestNonFiniteValues(t *testing.T) {
	r := makeSynthRun(synthOpts{durationS: 4, hz: 500, patchMu: 0.15})
	nan := math.NaN()
	r.steps[2].Pose.Hip[0] = nan
	r.steps[3].PeakUtilization = math.Inf(1)
	for i := 1500; i < 1600; i++ {
		r.ticks[i].Angle[0] = nan
		r.ticks[i].Feet[0].NormalN = math.Inf(1)
		r.ticks[i].Feet[1].Utilization = nan
	}
	// (The event's time stays finite: simulated time does not go NaN, and
	// record cannot read back a NaN t_s at present.)
	r.events = append(r.events, record.Event{Tick: 1999, T: 3.998, Kind: "non_finite_state", Severity: record.Trip, Message: "state is not finite", Segment: record.NoSegment})
	r.sum.PeakFrictionUtilization = math.Inf(1)
	dir := filepath.Join(t.TempDir(), "run")
	writeSynthFolder(t, dir, r, true)
	p := renderAndParse(t, dir)
	checkPlots(t, p)
	if rows := countElements(p.byID["steps"], "tr") - 1; rows != len(r.steps) {
		t.Errorf("steps table has %d rows, want all %d", rows, len(r.steps))
	}
	want := fmt.Sprintf("%d of %d heel strikes shown", len(r.steps)-1, len(r.steps))
	if c := p.texts["fig-plot-heel-strikes"]; !strings.Contains(c, want) {
		t.Errorf("heel-strike caption %q, want %q", c, want)
	}
	if !strings.Contains(p.texts["alarm-log"], "state is not finite") {
		t.Error("the non-finite-state alarm is missing from the alarm log")
	}
}

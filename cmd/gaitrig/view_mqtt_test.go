package main

import (
	"bufio"
	"bytes"
	"encoding/json"
	"io"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/prometheus/common/expfmt"

	"gaitrig/internal/headless"
)

// stderrLines starts cmd and hands every line it writes to stderr to the
// returned channel (closed when the process closes stderr); stdout is
// collected in the buffer.
func stderrLines(t *testing.T, cmd *exec.Cmd) (<-chan string, *lockedBuffer) {
	t.Helper()
	pr, pw := io.Pipe()
	out := &lockedBuffer{}
	cmd.Stdout = out
	cmd.Stderr = pw
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	lines := make(chan string, 256)
	go func() {
		defer close(lines)
		sc := bufio.NewScanner(pr)
		for sc.Scan() {
			lines <- sc.Text()
		}
	}()
	go func() { cmd.Wait(); pw.Close() }()
	t.Cleanup(func() { cmd.Process.Kill() })
	return lines, out
}

type lockedBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (l *lockedBuffer) Write(p []byte) (int, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.Write(p)
}

func (l *lockedBuffer) String() string {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.String()
}

// waitLine reads lines until one starts with prefix and returns it; the
// bound only stops a hang.
func waitLine(t *testing.T, lines <-chan string, prefix string, seen *[]string) string {
	t.Helper()
	timeout := time.After(120 * time.Second)
	for {
		select {
		case l, ok := <-lines:
			if !ok {
				t.Fatalf("the command ended without a %q line; its stderr:\n%s", prefix, strings.Join(*seen, "\n"))
			}
			*seen = append(*seen, l)
			if strings.HasPrefix(l, prefix) {
				return l
			}
		case <-timeout:
			t.Fatalf("no %q line; stderr so far:\n%s", prefix, strings.Join(*seen, "\n"))
		}
	}
}

func urlIn(line string) string {
	i := strings.Index(line, "http://")
	if i < 0 {
		return ""
	}
	return strings.Fields(line[i:])[0]
}

// TestRunViewAndMetricsOverMQTTCommand runs `gaitrig run --link embedded
// --view --metrics` as a process: the reference firmware on the other side
// of the embedded MQTT broker. The page, in headless Chromium, follows the
// run to its end and shows its outcome and steps as summary.json has them;
// the metrics endpoint stays up after the run until a scrape has read the
// final values (the outcome, ticks and steps of summary.json), and then the
// process ends by itself with the outcome's exit code.
func TestRunViewAndMetricsOverMQTTCommand(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the command; skipped with -short")
	}
	if ok, required := headless.Available(); !ok {
		if required {
			t.Fatal("chromium not found and GAITRIG_REQUIRE_TOOLS=1")
		}
		t.Skip("chromium not found")
	}
	bin := buildCommand(t)
	b, err := headless.Start(t.TempDir(), 1200, 900, 60*time.Second)
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	dir := filepath.Join(t.TempDir(), "run")
	cmd := exec.Command(bin, "run", "--quiet", "--no-report", "--dir", dir, "--link", "embedded", "--rig", "cmdview",
		"--max-steps", "6", "--duration", "300", "--view", "--metrics", "--metrics-linger", "10m", "level-demo")
	lines, out := stderrLines(t, cmd)
	var seen []string
	metricsURL := urlIn(waitLine(t, lines, "metrics: http", &seen))
	viewURL := urlIn(waitLine(t, lines, "live view: http", &seen))
	if err := b.Navigate(viewURL, 20*time.Second); err != nil {
		t.Fatal(err)
	}
	if err := b.WaitFor(`document.getElementById("state").dataset.state === "done"`, 120*time.Second); err != nil {
		t.Fatalf("%v\nstderr:\n%s", err, strings.Join(seen, "\n"))
	}
	final := urlIn(waitLine(t, lines, "metrics: serving the final values", &seen))
	if final != metricsURL {
		t.Errorf("the final values are at %q, the metrics were at %q", final, metricsURL)
	}
	resp, err := (&http.Client{Timeout: 20 * time.Second}).Get(final)
	if err != nil {
		t.Fatalf("a scrape after the run: %v", err)
	}
	var p expfmt.TextParser
	mf, err := p.TextToMetricFamilies(resp.Body)
	resp.Body.Close()
	if err != nil {
		t.Fatal(err)
	}
	waitLine(t, lines, "metrics: final values scraped", &seen)
	for range lines { // the process ends by itself once the scrape was read
	}
	s := readSummary(t, dir)
	if code := cmd.ProcessState.ExitCode(); code != outcomeCode(s.Outcome) {
		t.Errorf("exit code %d, outcome %s", code, s.Outcome)
	}
	got := map[string]float64{}
	for name, f := range mf {
		for _, m := range f.Metric {
			labels := ""
			for _, l := range m.Label {
				if l.GetName() == "outcome" && m.GetGauge().GetValue() == 1 {
					labels = l.GetValue()
				}
			}
			switch {
			case m.Counter != nil:
				got[name] += m.Counter.GetValue()
			case name == "gaitrig_run_outcome" && labels != "":
				got["outcome="+labels] = 1
			}
		}
	}
	if got["gaitrig_ticks_total"] != float64(s.Ticks) || got["gaitrig_steps_total"] != float64(s.Steps) || got["outcome="+string(s.Outcome)] != 1 {
		t.Errorf("the scrape after the run shows %v; summary.json: %d ticks, %d steps, %s", got, s.Ticks, s.Steps, s.Outcome)
	}
	var state, outcome, link string
	var rows int
	for _, e := range []struct {
		expr string
		into any
	}{
		{`document.getElementById("state").dataset.outcome`, &outcome},
		{`document.getElementById("link").textContent`, &link},
		{`document.querySelectorAll("#steptable tbody tr").length`, &rows},
		{`document.getElementById("state").dataset.state`, &state},
	} {
		if err := b.Eval(e.expr, e.into, 20*time.Second); err != nil {
			t.Fatal(err)
		}
	}
	if outcome != string(s.Outcome) || rows != s.Steps || !strings.Contains(link, "mqtt:embedded") {
		t.Errorf("the page shows outcome %q, %d steps, %q; summary.json %s, %d steps over mqtt:embedded", outcome, rows, link, s.Outcome, s.Steps)
	}
	if !strings.Contains(out.String(), "passing simulation is not a safety certificate") && !strings.Contains(out.String(), "not a safety certificate") {
		t.Errorf("no safety caution printed:\n%s", out.String())
	}
}

// `gaitrig compare` of two runs over the embedded MQTT broker, made from
// the command line: within tolerances (exit 0), same start, no diverging
// tick, both folders naming the MQTT link.
func TestCompareCommandOverMQTT(t *testing.T) {
	root := t.TempDir()
	a, b := filepath.Join(root, "a"), filepath.Join(root, "b")
	for _, dir := range []string{a, b} {
		if code, _, stderr := run(t, "run", "--quiet", "--no-report", "--dir", dir, "--link", "embedded", "--rig", "cmp", "--duration", "2", "level-demo"); code > 1 {
			t.Fatalf("run over the embedded broker: exit %d\n%s", code, stderr)
		}
	}
	code, stdout, stderr := run(t, "compare", "--html", filepath.Join(root, "ab.html"), "--json", a, b)
	if code != 0 {
		t.Fatalf("compare of two MQTT runs: exit %d\n%s\n%s", code, stdout, stderr)
	}
	var res struct {
		Within        bool `json:"within_tolerances"`
		SameStart     bool `json:"same_start"`
		Divergence    any  `json:"first_divergence"`
		ComparedTicks int  `json:"compared_ticks"`
	}
	if err := json.Unmarshal([]byte(stdout), &res); err != nil {
		t.Fatalf("--json output: %v\n%s", err, stdout)
	}
	if !res.Within || !res.SameStart || res.Divergence != nil || res.ComparedTicks != 2000 {
		t.Errorf("two MQTT runs: %+v", res)
	}
	for _, dir := range []string{a, b} {
		m, err := os.ReadFile(filepath.Join(dir, "manifest.json"))
		if err != nil || !strings.Contains(string(m), "mqtt:embedded") {
			t.Errorf("%s does not name the MQTT link (%v)", dir, err)
		}
	}
}

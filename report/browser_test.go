package report

import (
	"bytes"
	"context"
	"errors"
	"image/color"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"golang.org/x/net/html"

	"gaitrig/record"
)

// findChromium returns the path of the headless browser, failing the test
// when it is missing and GAITRIG_REQUIRE_TOOLS=1, skipping it otherwise.
func findChromium(t *testing.T) string {
	t.Helper()
	for _, name := range []string{"chromium", "/usr/bin/chromium"} {
		if p, err := exec.LookPath(name); err == nil {
			return p
		}
	}
	if os.Getenv("GAITRIG_REQUIRE_TOOLS") == "1" {
		t.Fatal("chromium not found (Debian package chromium) and GAITRIG_REQUIRE_TOOLS=1")
	}
	t.Skip("chromium not found: install the Debian package chromium to run the browser check (set GAITRIG_REQUIRE_TOOLS=1 to make this a failure)")
	return ""
}

// runChromium runs headless Chromium with args, bounded by timeout. The
// browser runs in its own process group, which is killed when the time is
// up and after it exits, so no helper process outlives the test.
func runChromium(t *testing.T, bin string, timeout time.Duration, args ...string) []byte {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), timeout)
	defer cancel()
	base := []string{
		"--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
		"--disable-background-networking", "--disable-component-update", "--disable-sync",
		"--user-data-dir=" + t.TempDir(),
	}
	cmd := exec.CommandContext(ctx, bin, append(base, args...)...)
	cmd.SysProcAttr = &syscall.SysProcAttr{Setpgid: true}
	cmd.Cancel = func() error { return syscall.Kill(-cmd.Process.Pid, syscall.SIGKILL) }
	cmd.WaitDelay = 5 * time.Second
	var stdout, stderr bytes.Buffer
	cmd.Stdout, cmd.Stderr = &stdout, &stderr
	err := cmd.Run()
	if cmd.Process != nil {
		_ = syscall.Kill(-cmd.Process.Pid, syscall.SIGKILL) // leftover helpers of our own group only
	}
	if errors.Is(ctx.Err(), context.DeadlineExceeded) {
		t.Fatalf("chromium did not finish within %v; stderr:\n%s", timeout, tail(stderr.String(), 2000))
	}
	if err != nil {
		t.Fatalf("chromium %v: %v; stderr:\n%s", args, err, tail(stderr.String(), 2000))
	}
	return stdout.Bytes()
}

func tail(s string, n int) string {
	if len(s) > n {
		return "…" + s[len(s)-n:]
	}
	return s
}

// TestReportInChromium loads a report in headless Chromium, finds every
// plot in the DOM the browser built, and checks a screenshot shows them
// drawn (pixels of the legs' colours are on the page).
func TestReportInChromium(t *testing.T) {
	bin := findChromium(t)
	dir := filepath.Join(t.TempDir(), "run")
	// A walker with a torso and measured latency, so every figure the
	// report can draw is on the page.
	r := makeSynthRun(synthOpts{durationS: 8, hz: 1000, patchMu: 0.15, withTorso: true})
	r.m.Clock = "wallclock"
	for i := range r.ticks {
		r.ticks[i].LatencyUS = 900 + float64((i*53)%400)
	}
	r.sum.Criteria = append(r.sum.Criteria, record.Criterion{Name: latencyCriterion, Pass: true, Value: 1290, Limit: 2000})
	writeSynthFolder(t, dir, r, true)
	ids := append(append([]string{}, plotIDs...), torsoPlotID, latencyPlotID, latencyCDFID, latencyTailID)
	if err := WriteHTML(dir); err != nil {
		t.Fatal(err)
	}
	abs, err := filepath.Abs(filepath.Join(dir, HTMLFile))
	if err != nil {
		t.Fatal(err)
	}
	url := "file://" + abs

	t.Run("dom", func(t *testing.T) {
		out := runChromium(t, bin, 90*time.Second, "--dump-dom", url)
		doc, err := html.Parse(bytes.NewReader(out))
		if err != nil {
			t.Fatalf("dumped DOM does not parse: %v", err)
		}
		found := map[string]int{}
		svgs := 0
		var walk func(n *html.Node)
		walk = func(n *html.Node) {
			if n.Type == html.ElementNode && n.Data == "svg" {
				svgs++
				for _, a := range n.Attr {
					if a.Key == "id" {
						found[a.Val]++
						if countElements(n, "path") < 3 {
							t.Errorf("#%s in the browser DOM has almost no drawing", a.Val)
						}
					}
				}
			}
			for c := n.FirstChild; c != nil; c = c.NextSibling {
				walk(c)
			}
		}
		walk(doc)
		for _, id := range ids {
			if found[id] != 1 {
				t.Errorf("browser DOM has %d <svg id=%q>, want 1", found[id], id)
			}
		}
		if svgs != len(ids) {
			t.Errorf("browser DOM has %d <svg> elements, want %d", svgs, len(ids))
		}
		if !strings.Contains(textOf(doc), "not a safety certificate") {
			t.Error("safety caution not in the browser DOM")
		}
	})

	t.Run("screenshot", func(t *testing.T) {
		shot := filepath.Join(t.TempDir(), "report.png")
		runChromium(t, bin, 90*time.Second, "--hide-scrollbars", "--window-size=1200,5200", "--screenshot="+shot, url)
		f, err := os.Open(shot)
		if err != nil {
			t.Fatalf("no screenshot: %v", err)
		}
		defer f.Close()
		img, err := png.Decode(f)
		if err != nil {
			t.Fatalf("screenshot is not a PNG: %v", err)
		}
		near := func(c color.Color, want color.RGBA) bool {
			r, g, b, _ := c.RGBA()
			d := func(a uint32, w uint8) int { x := int(a>>8) - int(w); return x * x }
			return d(r, want.R)+d(g, want.G)+d(b, want.B) < 20*20
		}
		var left, right int
		bnd := img.Bounds()
		for y := bnd.Min.Y; y < bnd.Max.Y; y += 2 {
			for x := bnd.Min.X; x < bnd.Max.X; x += 2 {
				c := img.At(x, y)
				if near(c, colLeft) {
					left++
				}
				if near(c, colRight) {
					right++
				}
			}
		}
		// A page with the plots drawn has thousands of such pixels (lines,
		// legends, stick figures); a blank or broken page has none.
		if left < 500 || right < 500 {
			t.Errorf("screenshot has %d left-leg and %d right-leg coloured pixels (sampled); the plots do not seem drawn", left, right)
		}
		t.Logf("sampled pixels: %d left-leg blue, %d right-leg orange", left, right)
	})
}

package main

import (
	"bufio"
	"bytes"
	"fmt"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"gaitrig/internal/headless"
	"gaitrig/record"
)

// startWithURL starts cmd and returns the URL it prints on a line that
// begins with prefix (on stderr), with everything it wrote so far.
func startWithURL(t *testing.T, cmd *exec.Cmd, prefix string) (string, *bytes.Buffer) {
	t.Helper()
	pr, pw := io.Pipe()
	var out bytes.Buffer
	cmd.Stdout = &out
	cmd.Stderr = pw
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		cmd.Process.Kill()
		cmd.Wait()
		pw.Close()
	})
	found := make(chan string, 1)
	go func() {
		sc := bufio.NewScanner(pr)
		for sc.Scan() {
			l := sc.Text()
			if i := strings.Index(l, "http://"); strings.HasPrefix(l, prefix) && i >= 0 {
				select {
				case found <- strings.Fields(l[i:])[0]:
				default:
				}
			}
		}
	}()
	select {
	case u := <-found:
		return u, &out
	case <-time.After(60 * time.Second):
		t.Fatalf("no %q line within 60 s:\n%s", prefix, out.String())
	}
	return "", nil
}

// TestRunViewCommand runs `gaitrig run --view` as a process, loads the
// page in headless Chromium while the run goes, sees frames and steps
// arrive, interrupts the run with SIGINT and sees the page say it ended;
// then `gaitrig replay --view` serves the same folder.
func TestRunViewCommand(t *testing.T) {
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
	// Held to real time and long: the test ends it with SIGINT.
	cmd := exec.Command(bin, "run", "--quiet", "--no-report", "--dir", dir, "--duration", "300", "--max-steps", "0", "--view", "level-demo")
	url, out := startWithURL(t, cmd, "live view:")
	if err := b.Navigate(url, 20*time.Second); err != nil {
		t.Fatal(err)
	}
	if err := b.WaitFor(`Number(document.getElementById("frames").dataset.count) >= 30 && document.querySelectorAll("#steptable tbody tr").length >= 2`, 60*time.Second); err != nil {
		t.Fatal(err)
	}
	if err := cmd.Process.Signal(syscall.SIGINT); err != nil {
		t.Fatal(err)
	}
	if err := b.WaitFor(`document.getElementById("state").dataset.state === "done" && document.getElementById("state").dataset.outcome === "aborted"`, 60*time.Second); err != nil {
		t.Fatal(err)
	}
	done := make(chan error, 1)
	go func() { done <- cmd.Wait() }()
	select {
	case <-done:
	case <-time.After(60 * time.Second):
		t.Fatalf("gaitrig run --view did not end after SIGINT:\n%s", out.String())
	}
	if code := cmd.ProcessState.ExitCode(); code != exitFail {
		t.Errorf("exit code %d after SIGINT, want %d", code, exitFail)
	}
	s := readSummary(t, dir)
	var summary string
	if err := b.Eval(`document.getElementById("summary").textContent`, &summary, 20*time.Second); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(summary, fmt.Sprintf("%d steps, %d ticks", s.Steps, s.Ticks)) {
		t.Errorf("the page's summary %q does not match summary.json (%d steps, %d ticks)", summary, s.Steps, s.Ticks)
	}
	if s.Outcome != record.Aborted {
		t.Errorf("outcome %q", s.Outcome)
	}

	// The same folder played back.
	rp := exec.Command(bin, "replay", "--view", dir)
	url, _ = startWithURL(t, rp, "live view (replay")
	if err := b.Navigate(url, 20*time.Second); err != nil {
		t.Fatal(err)
	}
	if err := b.WaitFor(`document.getElementById("mode").textContent === "replay" && Number(document.getElementById("frames").dataset.count) >= 10`, 60*time.Second); err != nil {
		t.Fatal(err)
	}
	if err := rp.Process.Signal(syscall.SIGINT); err != nil {
		t.Fatal(err)
	}
	go func() { done <- rp.Wait() }()
	select {
	case <-done:
	case <-time.After(60 * time.Second):
		t.Fatal("gaitrig replay --view did not end after SIGINT")
	}
	if code := rp.ProcessState.ExitCode(); code != exitPass {
		t.Errorf("replay --view exit code %d, want %d (the replay matches)", code, exitPass)
	}
}

// Bad view flags are usage errors, before anything opens.
func TestViewFlagErrors(t *testing.T) {
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"run", "--view", "--view-pace", "slow", "level-demo"}, "--view-pace"},
		{[]string{"run", "--view-pace", "free", "level-demo"}, "needs --view"},
		{[]string{"run", "--metrics=nonsense", "level-demo"}, "--metrics=nonsense: want HOST:PORT"},
		{[]string{"run", "--metrics", "--metrics-linger", "-1s", "level-demo"}, "--metrics-linger -1s: want a duration ≥ 0"},
	} {
		code, _, stderr := run(t, c.args...)
		if code != 2 || !strings.Contains(stderr, c.want) {
			t.Errorf("%v: exit %d, stderr %q; want 2 naming %s", c.args, code, stderr, c.want)
		}
	}
	t.Setenv("GAITRIG_VIEW_TOKEN", "")
	for _, flag := range []string{"--view=0.0.0.0:0", "--metrics=0.0.0.0:0"} {
		out := t.TempDir()
		code, _, stderr := run(t, "run", "--quiet", "--no-report", "--out", out, "--duration", "0.1", flag, "level-demo")
		if code != 2 || !strings.Contains(stderr, "GAITRIG_VIEW_TOKEN") {
			t.Errorf("%s without a token: exit %d, stderr %q", flag, code, stderr)
		}
		if entries, _ := os.ReadDir(out); len(entries) != 0 {
			t.Errorf("%s without a token left %d entries in --out: the check must come before the run folder", flag, len(entries))
		}
	}
}

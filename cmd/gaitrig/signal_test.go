package main

import (
	"bufio"
	"io"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/creack/pty"

	"gaitrig/record"
)

// lineWatcher collects a process's output and reports when a line with a
// given text has appeared, so a test acts on what the process said, not
// on how long it took.
type lineWatcher struct {
	lines chan string
	all   strings.Builder
}

func watchLines(r io.Reader) *lineWatcher {
	w := &lineWatcher{lines: make(chan string, 1024)}
	go func() {
		sc := bufio.NewScanner(r)
		for sc.Scan() {
			w.lines <- sc.Text()
		}
		close(w.lines)
	}()
	return w
}

// waitFor reads lines until one contains text; false if the output ended
// or limit passed first (the limit only keeps a broken build from hanging
// the test; no assertion depends on it).
func (w *lineWatcher) waitFor(text string, limit time.Duration) bool {
	timeout := time.After(limit)
	for {
		select {
		case l, ok := <-w.lines:
			if !ok {
				return false
			}
			w.all.WriteString(l + "\n")
			if strings.Contains(l, text) {
				return true
			}
		case <-timeout:
			return false
		}
	}
}

func (w *lineWatcher) rest() string {
	for l := range w.lines {
		w.all.WriteString(l + "\n")
	}
	return w.all.String()
}

// SIGINT while the rig waits for the greeting ends the run at once with
// outcome aborted and a complete run folder. The port is a real pty with
// nobody on the other end; had the signal been ignored until the greeting
// timeout, the run would still end as aborted, but with "no greeting" as
// its reason, so the reason tells the two apart without a clock.
func TestInterruptWhileWaitingForTheGreeting(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the command; skipped with -short")
	}
	bin := buildCommand(t)
	master, slave, err := pty.Open()
	if err != nil {
		// A pseudo-terminal pair is one of the real parts the tests
		// rely on: CI (GAITRIG_REQUIRE_TOOLS=1) must not pass without it.
		if os.Getenv("GAITRIG_REQUIRE_TOOLS") == "1" {
			t.Fatalf("no pseudo-terminal here, and GAITRIG_REQUIRE_TOOLS=1 requires one: %v", err)
		}
		t.Skipf("no pseudo-terminal here: %v; set GAITRIG_REQUIRE_TOOLS=1 to make this a failure", err)
	}
	defer master.Close()
	defer slave.Close()
	dir := filepath.Join(t.TempDir(), "run")
	cmd := exec.Command(bin, "run", "--quiet", "--link", "serial:"+slave.Name(), "--dir", dir, "level-demo")
	pr, pw := io.Pipe()
	cmd.Stdout, cmd.Stderr = pw, pw
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	defer cmd.Process.Kill()
	w := watchLines(pr)
	if !w.waitFor("link: serial", 30*time.Second) {
		t.Fatalf("the rig never said it opened the link:\n%s", w.all.String())
	}
	if err := cmd.Process.Signal(syscall.SIGINT); err != nil {
		t.Fatal(err)
	}
	err = cmd.Wait()
	pw.Close()
	out := w.rest()
	if code := cmd.ProcessState.ExitCode(); code != exitFail {
		t.Errorf("exit code %d (%v), want %d\n%s", code, err, exitFail, out)
	}
	s := readSummary(t, dir)
	if s.Outcome != record.Aborted || !strings.Contains(s.Reason, "interrupted by the operator while waiting for the greeting") {
		t.Fatalf("outcome %s (%s), want aborted by the operator while waiting for the greeting\n%s", s.Outcome, s.Reason, out)
	}
	r, err := record.Open(dir)
	if err != nil || len(r.Notes) != 0 {
		t.Fatalf("run folder after the interrupt: %v, notes %v", err, r.Notes)
	}
}

// A second SIGINT ends the process at once, even while it is stuck in a
// wait the first cannot cut short: connecting to a "broker" (a loopback
// listener of this test) that accepts the connection and never answers.
// Without the second signal the process would end only when the connect
// timeout gives up, with the configuration exit code 2, not 130.
func TestSecondInterruptEndsTheProcess(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the command; skipped with -short")
	}
	bin := buildCommand(t)
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	accepted := make(chan net.Conn, 1)
	go func() {
		c, err := ln.Accept()
		if err == nil {
			accepted <- c
		}
	}()
	cmd := exec.Command(bin, "run", "--quiet", "--link", "mqtt:tcp://"+ln.Addr().String(), "--dir", filepath.Join(t.TempDir(), "run"), "level-demo")
	pr, pw := io.Pipe()
	cmd.Stdout, cmd.Stderr = pw, pw
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	defer cmd.Process.Kill()
	w := watchLines(pr)
	select {
	case c := <-accepted:
		defer c.Close()
	case <-time.After(30 * time.Second):
		t.Fatal("gaitrig never connected to the silent broker")
	}
	if err := cmd.Process.Signal(syscall.SIGINT); err != nil {
		t.Fatal(err)
	}
	if !w.waitFor("interrupt again to end the process now", 30*time.Second) {
		t.Fatalf("the first SIGINT was not acknowledged:\n%s", w.rest())
	}
	if err := cmd.Process.Signal(syscall.SIGINT); err != nil {
		t.Fatal(err)
	}
	cmd.Wait()
	pw.Close()
	out := w.rest()
	if code := cmd.ProcessState.ExitCode(); code != exitKilled {
		t.Fatalf("exit code %d after a second SIGINT, want %d\n%s", code, exitKilled, out)
	}
	if !strings.Contains(out, "second interrupt") {
		t.Errorf("no word on the second interrupt:\n%s", out)
	}
}

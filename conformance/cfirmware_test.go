package conformance

import (
	"bytes"
	"context"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/serial"
)

// cflags are the example firmware's build flags (testdata/firmware/c/Makefile
// and the end-to-end test use the same).
var cflags = []string{"-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic", "-O2"}

// buildCFirmware compiles the example C firmware with gcc, or skips when gcc
// is missing (fails instead with GAITRIG_REQUIRE_TOOLS=1).
func buildCFirmware(t *testing.T) string {
	t.Helper()
	gcc, err := exec.LookPath("gcc")
	if err != nil {
		if os.Getenv("GAITRIG_REQUIRE_TOOLS") == "1" {
			t.Fatalf("gcc is required (GAITRIG_REQUIRE_TOOLS=1): %v", err)
		}
		t.Skipf("gcc not found (%v); set GAITRIG_REQUIRE_TOOLS=1 to make this a failure", err)
	}
	src := "../testdata/firmware/c"
	bin := filepath.Join(t.TempDir(), "gaitrig-cfw")
	args := append(append([]string{}, cflags...), "-o", bin,
		filepath.Join(src, "main_posix.c"), filepath.Join(src, "protocol.c"), filepath.Join(src, "controller.c"), "-lm")
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	out, err := exec.CommandContext(ctx, gcc, args...).CombinedOutput()
	if err != nil || len(bytes.TrimSpace(out)) > 0 {
		t.Fatalf("gcc %s: %v\n%s", strings.Join(args, " "), err, out)
	}
	return bin
}

// cProc is one C firmware process for a whole test.
type cProc struct {
	cmd    *exec.Cmd
	stderr syncBuffer
	done   chan struct{}
}

// syncBuffer is a bytes.Buffer safe for the process's writer and the
// test's reader.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// startC starts the C firmware on tty for the rest of the test, with flags
// before the tty (without --once it greets again after every stop, as a
// board does). At the end of the
// test it gets SIGTERM and, bounded, is killed; its stderr is logged when
// the test failed.
func startC(t *testing.T, bin, tty string, flags ...string) *cProc {
	t.Helper()
	args := append(append([]string{"-v"}, flags...), tty)
	p := &cProc{cmd: exec.Command(bin, args...), done: make(chan struct{})}
	p.cmd.Stderr = &p.stderr
	if err := p.cmd.Start(); err != nil {
		t.Fatalf("starting the C firmware: %v", err)
	}
	go func() { _ = p.cmd.Wait(); close(p.done) }()
	t.Cleanup(func() {
		p.end()
		if t.Failed() {
			t.Logf("C firmware stderr:\n%s", p.stderr.String())
		}
	})
	return p
}

// end stops the process (SIGTERM, then a kill after a bounded wait) and
// waits for it.
func (p *cProc) end() {
	select {
	case <-p.done:
		return
	default:
	}
	_ = p.cmd.Process.Signal(syscall.SIGTERM)
	select {
	case <-p.done:
	case <-time.After(3 * time.Second):
		_ = p.cmd.Process.Kill()
		<-p.done
	}
}

// exited reports whether the process has ended.
func (p *cProc) exited() bool {
	select {
	case <-p.done:
		return true
	default:
		return false
	}
}

// counter reads one value of the "cfw: counters" line the firmware prints
// on exit.
func (p *cProc) counter(t *testing.T, key string) string {
	t.Helper()
	for _, line := range strings.Split(p.stderr.String(), "\n") {
		rest, ok := strings.CutPrefix(line, "cfw: counters ")
		if !ok {
			continue
		}
		for _, kv := range strings.Fields(rest) {
			if k, v, _ := strings.Cut(kv, "="); k == key {
				return v
			}
		}
	}
	t.Fatalf("no counter %q in the C firmware's stderr:\n%s", key, p.stderr.String())
	return ""
}

// passesInFull runs the battery and requires every check to pass and the
// firmware to be the example C firmware; then the one process must still
// be running (it served both sessions) and, once ended, count two sessions:
// the battery's stop and its own refusal of the bad config.
func passesInFull(t *testing.T, p *cProc, link string, dial Dialer) {
	t.Helper()
	rep, attempts := runUntilJudged(t, link, dial)
	if !rep.Passed || len(rep.Failed()) > 0 {
		t.Errorf("verdict %v, failed %v", rep.Passed, rep.Failed())
	}
	for _, c := range rep.Checks {
		if c.Status != Pass {
			t.Errorf("%s: %s (%s), want pass", c.Name, c.Status, c.Seen)
		}
	}
	if rep.Greeting == nil || rep.Greeting.Name != "gaitrig-example-c" {
		t.Errorf("greeting %+v, want the example C firmware's", rep.Greeting)
	}
	checkPercentiles(t, rep)
	if p.exited() {
		t.Fatalf("the C firmware exited during the battery; it must serve both sessions")
	}
	p.end()
	// Each attempt the host spoiled ended one session with the battery's
	// stop (abandonForHost).
	if got, want := p.counter(t, "sessions"), fmt.Sprint(2+attempts-1); got != want {
		t.Errorf("the C firmware counted %s sessions, want %s (the battery's stop, then its refusal, after %d attempts)", got, want, attempts)
	}
}

// The example C firmware, compiled with gcc, passes every check over a
// real pty pair, one process for both of the battery's sessions. The
// firmware holds the follower; the battery speaks on the leader, which it
// cannot close without the firmware seeing the cable pulled, so its
// "restart" is a new session on the same open line (a rig that reopens a
// port finds the line in the same state; the serial-port test below does
// reopen it).
func TestCFirmwarePasses(t *testing.T) {
	bin := buildCFirmware(t)
	pty, err := serial.NewPty()
	if err != nil {
		t.Fatal(err)
	}
	conn := serial.NewConn(pty.Master, "pty leader", serial.Config{})
	t.Cleanup(func() { conn.Close(); pty.Close() })
	p := startC(t, bin, pty.Path)
	dials := 0
	dial := func() (bridges.Conn, func(), error) {
		dials++
		return conn, func() {}, nil
	}
	passesInFull(t, p, "pty (C firmware)", dial)
	if dials != 2 {
		t.Errorf("the battery dialled %d times, want 2 (one per session)", dials)
	}
}

// The C firmware built one-shot (--once) exits on the battery's stop, as
// docs/protocol.md section 6 item 5 allows a test build to: the battery
// must then fail greets_after_restart, and only it, leave the refusal check
// not run, and withhold a passing verdict.
func TestCFirmwareOnceFailsGreetAgain(t *testing.T) {
	bin := buildCFirmware(t)
	pty, err := serial.NewPty()
	if err != nil {
		t.Fatal(err)
	}
	conn := serial.NewConn(pty.Master, "pty leader", serial.Config{})
	t.Cleanup(func() { conn.Close(); pty.Close() })
	p := startC(t, bin, pty.Path, "--once")
	dial := func() (bridges.Conn, func(), error) { return conn, func() {}, nil }
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	rep, err := Run(ctx, "pty (C firmware, --once)", dial, Options{Samples: 50})
	if err != nil {
		t.Fatal(err)
	}
	if f := rep.Failed(); len(f) != 1 || f[0] != CheckGreetsAgain {
		t.Errorf("failed checks %v, want exactly [%s]", f, CheckGreetsAgain)
	}
	if r, _ := rep.Result(CheckRefusesBadConf); r.Status != NotRun {
		t.Errorf("%s: %s, want %s", CheckRefusesBadConf, r.Status, NotRun)
	}
	if rep.Passed {
		t.Error("a one-shot firmware passed the battery")
	}
	select {
	case <-p.done:
	case <-time.After(20 * time.Second): // a bound on a hang
		t.Fatal("the --once firmware did not exit after the battery's stop")
	}
	if got := p.counter(t, "end"); got != "stop" {
		t.Errorf("the --once firmware ended with %q, want stop", got)
	}
}

// The bench with a cable: socat links two ptys, the C firmware opens one,
// and the battery opens the other as serial:PATH, through the rig's own
// serial link, closing and reopening it between its sessions. The test
// holds the rig's side open as well, as a cable stays plugged in while the
// rig program restarts: without a holder, socat would take the last close
// for a hang-up and end, and the firmware would see its line go.
func TestCFirmwarePassesOverSerialPort(t *testing.T) {
	bin := buildCFirmware(t)
	socat, err := exec.LookPath("socat")
	if err != nil {
		if os.Getenv("GAITRIG_REQUIRE_TOOLS") == "1" {
			t.Fatalf("socat is required (GAITRIG_REQUIRE_TOOLS=1): %v", err)
		}
		t.Skipf("socat not found (%v); set GAITRIG_REQUIRE_TOOLS=1 to make this a failure", err)
	}
	dir := t.TempDir()
	fwPath, rigPath := filepath.Join(dir, "firmware-tty"), filepath.Join(dir, "rig-tty")
	relay := exec.Command(socat, "pty,raw,echo=0,link="+fwPath, "pty,raw,echo=0,link="+rigPath)
	var relayErr syncBuffer
	relay.Stderr = &relayErr
	if err := relay.Start(); err != nil {
		t.Fatalf("starting socat: %v", err)
	}
	relayDone := make(chan struct{})
	go func() { _ = relay.Wait(); close(relayDone) }()
	t.Cleanup(func() {
		_ = relay.Process.Kill()
		<-relayDone
	})
	for deadline := time.Now().Add(20 * time.Second); ; time.Sleep(10 * time.Millisecond) { // a bound on a hang
		_, e1 := os.Stat(fwPath)
		_, e2 := os.Stat(rigPath)
		if e1 == nil && e2 == nil {
			break
		}
		if time.Now().After(deadline) {
			t.Fatalf("socat made no linked ptys within 20 s: %v %v\n%s", e1, e2, relayErr.String())
		}
	}
	holder, err := os.OpenFile(rigPath, os.O_RDWR|syscall.O_NOCTTY, 0)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { holder.Close() })
	p := startC(t, bin, fwPath)
	link := "serial:" + rigPath
	dial, err := LinkDialer(link, "conformance-test")
	if err != nil {
		t.Fatal(err)
	}
	passesInFull(t, p, link, dial)
}

// The example C firmware announcing a kneed torso walker (-j 4) passes the
// battery too: the battery configures the four joints by the names a rig
// gives a kneed walker (hips, then knee_left and knee_right), which the
// firmware finds by name.
func TestCFirmwareKneedPasses(t *testing.T) {
	bin := buildCFirmware(t)
	pty, err := serial.NewPty()
	if err != nil {
		t.Fatal(err)
	}
	conn := serial.NewConn(pty.Master, "pty leader", serial.Config{})
	t.Cleanup(func() { conn.Close(); pty.Close() })
	p := startC(t, bin, pty.Path, "-j", "4")
	dial := func() (bridges.Conn, func(), error) { return conn, func() {}, nil }
	passesInFull(t, p, "pty (C firmware, -j 4)", dial)
}

package conformance

import (
	"bytes"
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
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

// cDialer starts the C firmware on the follower of a new pty pair with
// every dial, as a board powered up anew, and gives the battery the
// leader. Closing the link closes the leader; the firmware then sees the
// line hang up and exits, or is killed after a bounded wait.
func cDialer(t *testing.T, bin string) Dialer {
	var mu sync.Mutex
	var stderr []*bytes.Buffer
	t.Cleanup(func() {
		if t.Failed() {
			mu.Lock()
			for i, b := range stderr {
				t.Logf("C firmware run %d stderr:\n%s", i+1, b.String())
			}
			mu.Unlock()
		}
	})
	return func() (bridges.Conn, func(), error) {
		p, err := serial.NewPty()
		if err != nil {
			return nil, nil, err
		}
		var errBuf bytes.Buffer
		cmd := exec.Command(bin, p.Path)
		cmd.Stderr = &errBuf
		if err := cmd.Start(); err != nil {
			p.Close()
			return nil, nil, err
		}
		mu.Lock()
		stderr = append(stderr, &errBuf)
		mu.Unlock()
		waited := make(chan struct{})
		go func() { cmd.Wait(); close(waited) }()
		conn := serial.NewConn(p.Master, "pty leader", serial.Config{})
		return conn, func() {
			conn.Close()
			p.Close()
			select {
			case <-waited:
			case <-time.After(3 * time.Second):
				cmd.Process.Kill()
				<-waited
			}
		}, nil
	}
}

// The example C firmware, compiled with gcc, passes every check over a
// real pty pair.
func TestCFirmwarePasses(t *testing.T) {
	bin := buildCFirmware(t)
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	rep, err := Run(ctx, "pty (C firmware)", cDialer(t, bin), Options{Samples: testSamples, Log: func(l string) { t.Log(l) }})
	if err != nil {
		t.Fatal(err)
	}
	if !rep.Passed || len(rep.Failed()) > 0 {
		t.Fatalf("verdict %v, failed %v", rep.Passed, rep.Failed())
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
}

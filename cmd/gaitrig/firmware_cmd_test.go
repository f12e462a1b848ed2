package main

import (
	"bytes"
	"strings"
	"sync"
	"testing"
	"time"

	"gaitrig/bridges/broker"
)

// lineTap is a writer for a command's stdout that keeps everything and
// hands each line that contains want to a channel, for a test that must
// read an announcement while the command runs.
type lineTap struct {
	mu    sync.Mutex
	buf   bytes.Buffer
	want  string
	lines chan string
}

func (w *lineTap) Write(p []byte) (int, error) {
	w.mu.Lock()
	defer w.mu.Unlock()
	w.buf.Write(p)
	for _, l := range strings.Split(string(p), "\n") {
		if w.want != "" && strings.Contains(l, w.want) {
			select {
			case w.lines <- l:
			default:
			}
		}
	}
	return len(p), nil
}

func (w *lineTap) String() string {
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.buf.String()
}

// `gaitrig firmware` is one process for the whole conformance battery, as
// a board is: after the battery's stop it greets again, so `gaitrig
// conformance` passes every required check with the rig restarted between
// its sessions, over the embedded broker (the firmware as its own MQTT
// client) and over a pty the firmware makes (the battery opening it as
// serial:PATH twice). The firmware then ends by itself after --idle with
// the status of its last run: the battery's bad config, which it refused.
func TestFirmwareCommandServesEveryRig(t *testing.T) {
	b, err := broker.Start(broker.Config{})
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	mqttLink := "mqtt:tcp://" + b.Addr()
	for _, tc := range []struct {
		name, link string
	}{{"embedded broker", mqttLink}, {"pty", "pty"}} {
		t.Run(tc.name, func(t *testing.T) {
			fwOut := &lineTap{want: "--link serial:", lines: make(chan string, 1)}
			var fwErr bytes.Buffer
			fwDone := make(chan int, 1)
			go func() {
				fwDone <- dispatch([]string{"firmware", "--link", tc.link, "--rig", "fwcmd", "--idle", "2s"}, fwOut, &fwErr)
			}()
			link := tc.link
			if tc.link == "pty" {
				select {
				case l := <-fwOut.lines:
					_, after, _ := strings.Cut(l, "--link ")
					link = strings.TrimSpace(after)
				case <-time.After(20 * time.Second):
					t.Fatal("the firmware printed no port within 20 s")
				}
			}
			code, out, errOut := run(t, "conformance", "--link", link, "--rig", "fwcmd", "--samples", "100")
			if code != exitPass {
				t.Errorf("conformance over %s: exit %d\n%s\n%s", link, code, out, errOut)
			}
			for _, check := range []string{"greets_after_restart", "refuses_bad_config"} {
				if !strings.Contains(out, check+" ") || !strings.Contains(lineOf(out, check), "pass") {
					t.Errorf("conformance over %s: %q", link, lineOf(out, check))
				}
			}
			select {
			case c := <-fwDone:
				if c == exitPass {
					t.Errorf("the firmware exited %d after refusing the last run's config, want a failure status", c)
				}
			case <-time.After(20 * time.Second):
				t.Fatal("the firmware did not end within 20 s of the battery (idle 2 s)")
			}
			fo := fwOut.String()
			if !strings.Contains(fo, "run 1: the rig ended the run normally") || !strings.Contains(fo, "run 2: ") {
				t.Errorf("firmware output does not report two runs:\n%s\n%s", fo, fwErr.String())
			}
		})
	}
}

// lineOf returns the first line of out that starts with prefix.
func lineOf(out, prefix string) string {
	for _, l := range strings.Split(out, "\n") {
		if strings.HasPrefix(l, prefix) {
			return l
		}
	}
	return ""
}

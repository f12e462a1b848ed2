package main

import (
	"bytes"
	"encoding/json"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"gaitrig/scenarios"
)

// mosquittoAddr gives the address of a real Mosquitto broker: the one .ci/run
// started (GAITRIG_MOSQUITTO_ADDR), or one this test starts.
func mosquittoAddr(t *testing.T) string {
	t.Helper()
	if a := os.Getenv("GAITRIG_MOSQUITTO_ADDR"); a != "" {
		return a
	}
	addr, stop, err := startMosquitto()
	if err != nil {
		if os.Getenv("GAITRIG_REQUIRE_TOOLS") == "1" {
			t.Fatalf("Mosquitto is required (GAITRIG_REQUIRE_TOOLS=1): %v", err)
		}
		t.Skipf("no Mosquitto broker: %v (install the Debian package mosquitto)", err)
	}
	t.Cleanup(stop)
	return addr
}

// TestRunOverMosquittoWithFirmwareProcessSide runs the rig and the reference
// firmware as two clients of a real Mosquitto broker, exactly as a bench
// with controller code on another machine would, and watches the run's
// alarm topic with Mosquitto's own mosquitto_sub as an outside client.
func TestRunOverMosquittoWithFirmwareProcessSide(t *testing.T) {
	addr := mosquittoAddr(t)
	url := "tcp://" + addr
	rig := "cmdtest" + strings.ReplaceAll(time.Now().Format("150405.000"), ".", "")

	// An outside observer on the alarm topic.
	var sub *exec.Cmd
	var subOut bytes.Buffer
	if bin, err := exec.LookPath("mosquitto_sub"); err == nil {
		host, port, _ := strings.Cut(addr, ":")
		sub = exec.Command(bin, "-h", host, "-p", port, "-t", "gaitrig/"+rig+"/alarm", "-C", "1", "-W", "60")
		sub.Stdout = &subOut
		if err := sub.Start(); err != nil {
			t.Fatal(err)
		}
		defer func() { sub.Process.Kill(); sub.Wait() }()
		time.Sleep(300 * time.Millisecond) // let it subscribe before alarms flow
	} else if os.Getenv("GAITRIG_REQUIRE_TOOLS") == "1" {
		t.Fatal("mosquitto_sub is required (GAITRIG_REQUIRE_TOOLS=1); install mosquitto-clients")
	}

	var wg sync.WaitGroup
	var fwCode int
	var fwOut, fwErr bytes.Buffer
	wg.Add(1)
	go func() {
		defer wg.Done()
		fwCode = dispatch([]string{"firmware", "--link", "mqtt:" + url, "--rig", rig}, &fwOut, &fwErr)
	}()

	// Four steps of the demo with 2 % of the commands corrupted on the way:
	// each raises a warn-level bad_frame alarm, which the rig publishes on
	// its alarm topic.
	base, err := resolveScenario("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	sc, err := variantOf(base, "mqtt-corrupt", func(s *scenarios.Scenario) {
		s.Faults = append(s.Faults, scenarios.Fault{Kind: scenarios.FaultCorrupt, Rate: 0.02})
		s.Run.MaxSteps = 4
		s.Pass.MinSteps = 4
	})
	if err != nil {
		t.Fatal(err)
	}
	file := filepath.Join(t.TempDir(), "mqtt-corrupt.yaml")
	if err := os.WriteFile(file, sc.Text, 0o644); err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "run")
	code, out, errOut := run(t, "run", "--quiet", "--report=false", "--link", "mqtt:"+url, "--rig", rig, "--dir", dir, file)
	wg.Wait()
	if code != exitPass {
		t.Fatalf("run over Mosquitto: exit %d\n%s\n%s", code, out, errOut)
	}
	if fwCode != exitPass {
		t.Errorf("firmware over Mosquitto: exit %d\n%s\n%s", fwCode, fwOut.String(), fwErr.String())
	}
	s := readSummary(t, dir)
	if s.Steps != 4 || s.Alarms["bad_frame"] == 0 {
		t.Errorf("over Mosquitto: %d steps and %d bad_frame alarms, want 4 steps and some alarms", s.Steps, s.Alarms["bad_frame"])
	}
	m, _ := os.ReadFile(filepath.Join(dir, "manifest.json"))
	if !bytes.Contains(m, []byte(url)) {
		t.Errorf("the manifest does not name the MQTT link %s", url)
	}
	if sub != nil {
		done := make(chan error, 1)
		go func() { done <- sub.Wait() }()
		select {
		case <-done:
		case <-time.After(10 * time.Second):
			t.Fatal("mosquitto_sub saw no alarm within 10 s of the run's end")
		}
		var alarm map[string]any
		if err := json.Unmarshal(bytes.TrimSpace(subOut.Bytes()), &alarm); err != nil {
			t.Fatalf("mosquitto_sub read an alarm that is not JSON: %v\n%q", err, subOut.String())
		}
		if _, ok := alarm["kind"]; !ok {
			t.Errorf("alarm seen by mosquitto_sub has no kind: %v", alarm)
		}
	}
}

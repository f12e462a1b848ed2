package main

import (
	"bytes"
	"encoding/json"
	"gaitrig/internal/mqtttest"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"gaitrig/record"
	"gaitrig/scenarios"
)

// TestRunOverMosquittoWithFirmwareProcessSide runs the rig and the reference
// firmware as two clients of a real Mosquitto broker, exactly as a bench
// with controller code on another machine would, and watches the run's
// alarm topic with Mosquitto's own mosquitto_sub as an outside client.
func TestRunOverMosquittoWithFirmwareProcessSide(t *testing.T) {
	addr := mqtttest.MosquittoAddr(t)
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

// startMosquittoOn starts Mosquitto on the given loopback port and returns a
// function that kills it (SIGKILL, as a crash would).
func startMosquittoOn(t *testing.T, port string) func() {
	t.Helper()
	bin, err := exec.LookPath("mosquitto")
	if err != nil {
		bin = "/usr/sbin/mosquitto"
	}
	conf := filepath.Join(t.TempDir(), "mosquitto.conf")
	if err := os.WriteFile(conf, []byte("listener "+port+" 127.0.0.1\nallow_anonymous true\npersistence false\nset_tcp_nodelay true\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(bin, "-c", conf)
	if err := cmd.Start(); err != nil {
		if os.Getenv("GAITRIG_REQUIRE_TOOLS") == "1" {
			t.Fatalf("Mosquitto is required (GAITRIG_REQUIRE_TOOLS=1): %v", err)
		}
		t.Skipf("no Mosquitto: %v", err)
	}
	for deadline := time.Now().Add(20 * time.Second); ; time.Sleep(20 * time.Millisecond) { // a bound on a hang: a process starting on a busy host
		if c, err := net.Dial("tcp", "127.0.0.1:"+port); err == nil {
			c.Close()
			break
		}
		if time.Now().After(deadline) {
			cmd.Process.Kill()
			cmd.Wait()
			t.Fatalf("Mosquitto did not listen on port %s within 20 s", port)
		}
	}
	var once sync.Once
	kill := func() { once.Do(func() { cmd.Process.Kill(); cmd.Wait() }) }
	t.Cleanup(kill)
	return kill
}

// TestBrokerKilledMidRun kills the Mosquitto broker in the middle of a run
// and starts it again on the same port: the rig must report the lost link,
// end or continue as the watchdog decides, never hang or crash, and leave a
// complete run folder.
func TestBrokerKilledMidRun(t *testing.T) {
	if _, err := exec.LookPath("mosquitto"); err != nil {
		if _, err := os.Stat("/usr/sbin/mosquitto"); err != nil {
			if os.Getenv("GAITRIG_REQUIRE_TOOLS") == "1" {
				t.Fatal("Mosquitto is required (GAITRIG_REQUIRE_TOOLS=1)")
			}
			t.Skip("no Mosquitto (install the Debian package mosquitto)")
		}
	}
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	_, port, _ := net.SplitHostPort(l.Addr().String())
	l.Close()
	kill := startMosquittoOn(t, port)
	url := "mqtt:tcp://127.0.0.1:" + port

	fwDone := make(chan int, 1)
	go func() {
		var o, e bytes.Buffer
		fwDone <- dispatch([]string{"firmware", "--link", url, "--rig", "crash"}, &o, &e)
	}()
	dir := filepath.Join(t.TempDir(), "run")
	type result struct {
		code     int
		out, err string
	}
	done := make(chan result, 1)
	go func() {
		c, o, e := run(t, "run", "--quiet", "--report=false", "--link", url, "--rig", "crash", "--dir", dir, "--max-steps", "200", "level-demo")
		done <- result{c, o, e}
	}()
	if !waitForTelemetry(dir, 20000, 30*time.Second) {
		t.Fatal("no telemetry over Mosquitto within 30 s")
	}
	kill()
	time.Sleep(300 * time.Millisecond)
	startMosquittoOn(t, port)

	var r result
	select {
	case r = <-done:
	case <-time.After(60 * time.Second):
		t.Fatal("the run did not end within 60 s of the broker crash")
	}
	select {
	case <-fwDone:
	case <-time.After(15 * time.Second):
		t.Error("the firmware client did not end within 15 s of the run")
	}
	s := readSummary(t, dir)
	if s.Alarms["link_lost"] == 0 {
		t.Errorf("alarms %v after a broker crash: want link_lost\n%s\n%s", s.Alarms, r.out, r.err)
	}
	if s.Outcome == record.Aborted || s.Outcome == "" {
		t.Errorf("outcome %q (%s): the run must end on its own terms (pass, fail or tripped)", s.Outcome, s.Reason)
	}
	rr, err := record.Open(dir)
	if err != nil {
		t.Fatalf("run folder unreadable after the broker crash: %v", err)
	}
	if len(rr.Notes) > 0 {
		t.Errorf("run folder incomplete after the broker crash: %v", rr.Notes)
	}
	t.Logf("outcome %s (%s), alarms %v", s.Outcome, s.Reason, s.Alarms)
}

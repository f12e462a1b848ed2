package e2e

import (
	"context"
	"fmt"
	"strings"
	"sync"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/broker"
	"gaitrig/bridges/mqtt"
	"gaitrig/bridges/protocol"
	"gaitrig/bridges/serial"
	"gaitrig/firmware/reference"
	"gaitrig/record"
)

// TestCFirmwareGetsTheEnforcedWatchdog: the rig sends the C firmware
// (protocol version 2, compiled with gcc, on a real pty) the watchdog it
// enforces, to the microsecond, and the firmware reads it. The firmware
// logs what it decoded; the expected figure is the configured duration
// converted here by hand, not by the rig's own conversion. The run walks,
// and the manifest records the version the firmware greeted with.
func TestCFirmwareGetsTheEnforcedWatchdog(t *testing.T) {
	b := buildC(t)
	cfg, model, initial := demoRun(t)
	cfg.MaxSteps, cfg.Criteria.MinSteps = 3, 3
	// An odd duration, so a rounding or unit slip shows: 2.345678912 s is
	// 2 345 678 whole microseconds.
	cfg.Watchdog = 2*time.Second + 345678912*time.Nanosecond
	const wantUS = 2345678
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()

	p := openPty(t)
	fw := startFirmware(t, ctx, b.firmware, p.Path)
	conn := serial.NewConn(p.Master, "pty "+p.Path, serial.Config{})
	defer conn.Close()
	res, dir := runLoop(t, ctx, cfg, model, initial, conn, "serial "+p.Path)
	if code := fw.wait(t, 10*time.Second); code != 0 {
		t.Fatalf("the C firmware exited %d after the run; stderr:\n%s", code, fw.stderr.String())
	}
	if res.Summary.Outcome != record.Pass || res.Summary.Steps < 3 {
		t.Fatalf("outcome %s after %d steps (%s)", res.Summary.Outcome, res.Summary.Steps, res.Summary.Reason)
	}
	want := fmt.Sprintf("cfw: configured: 1000 Hz, lockstep, 2 joints, watchdog %d us\n", wantUS)
	if !strings.Contains(fw.stderr.String(), want) {
		t.Errorf("the C firmware did not log %q; stderr:\n%s", want, fw.stderr.String())
	}
	run, err := record.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	if g := run.Manifest.Greeting; g.Protocol != 2 || g.Name != "gaitrig-example-c" {
		t.Errorf("manifest greeting %+v: want gaitrig-example-c speaking protocol 2", g)
	}
}

// TestCFirmwareJudgesSilenceByTheWatchdog drives the C firmware with a
// minimal rig on a real pty: a config announcing a 20 ms watchdog, one
// state, then 300 ms without a frame. The firmware must call the silence
// beyond the rig's watchdog (it holds its safe state and counts it as
// "quiet"), answer the next state as usual, and end normally on a stop.
// The silence is made long on purpose and only ever grows on a busy host,
// so the count is at least one, whatever the load; the exact rule is
// checked by the C self-test.
func TestCFirmwareJudgesSilenceByTheWatchdog(t *testing.T) {
	b := buildC(t)
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	_, fw, rig := startSession(t, ctx, b.firmware)
	rig.awaitGreeting()
	cfg := demoConfig()
	cfg.Config.WatchdogUS = 20000
	rig.send(&cfg)
	answer := func(seq uint32) {
		t.Helper()
		s := protocol.Message{Type: protocol.TypeState, Seq: seq}
		s.State = protocol.State{TimeUS: uint64(seq-1) * 1000, Joints: 2, Contacts: protocol.ContactLeft}
		rig.send(&s)
		for {
			c := rig.next(5*time.Second, true)
			if c.Type == protocol.TypeGreeting {
				continue // a repeat sent before the config arrived
			}
			if c.Type != protocol.TypeCommand || c.Seq != seq {
				t.Fatalf("state %d: want its command, got %+v", seq, c)
			}
			return
		}
	}
	answer(1)
	time.Sleep(300 * time.Millisecond)
	answer(2)
	stop := protocol.Message{Type: protocol.TypeStop, Seq: 2, Stop: protocol.Stop{Reason: protocol.StopEnd, Text: "run finished"}}
	rig.send(&stop)
	if code := fw.wait(t, 5*time.Second); code != 0 {
		t.Fatalf("exit %d after stop(end); stderr:\n%s", code, fw.stderr.String())
	}
	c := fw.counters(t)
	if n := counter(t, c, "quiet"); n < 1 {
		t.Errorf("quiet = %d after 300 ms of silence against a 20 ms watchdog; want at least 1 (counters %v)", n, c)
	}
	if !strings.Contains(fw.stderr.String(), "beyond its watchdog of 20000 us: holding the safe state") {
		t.Errorf("the firmware did not say it holds its safe state; stderr:\n%s", fw.stderr.String())
	}
	if counter(t, c, "commands") != 2 {
		t.Errorf("commands = %s, want 2: the state after the silence is answered as usual", c["commands"])
	}
}

// TestV1FirmwareOverMQTT: a firmware of protocol version 1 (the Go
// reference firmware told to be one) walks through the embedded broker,
// with the binary frames and with the JSON debug form, whose "version"
// key must carry the version as faithfully as the header does. The
// firmware must receive the version-1 config (no watchdog) and nothing of
// version 2.
func TestV1FirmwareOverMQTT(t *testing.T) {
	for _, jsonForm := range []bool{false, true} {
		t.Run(fmt.Sprintf("json=%v", jsonForm), func(t *testing.T) {
			b, err := broker.Start(broker.Config{})
			if err != nil {
				t.Fatal(err)
			}
			defer b.Close()
			url := "tcp://" + b.Addr()
			rigConn, err := mqtt.Dial(mqtt.Config{Broker: url, Rig: "v1", Role: mqtt.RoleRig, JSON: jsonForm})
			if err != nil {
				t.Fatal(err)
			}
			defer rigConn.Close()
			fwConn, err := mqtt.Dial(mqtt.Config{Broker: url, Rig: "v1", Role: mqtt.RoleFirmware, JSON: jsonForm})
			if err != nil {
				t.Fatal(err)
			}
			defer fwConn.Close()
			tap := &versionTap{Conn: fwConn, seen: map[uint8]int{}}
			served := make(chan error, 1)
			go func() {
				served <- reference.Serve(tap, reference.Options{Protocol: 1, IdleTimeout: 10 * time.Second})
			}()
			cfg, model, initial := demoRun(t)
			cfg.MaxSteps, cfg.Criteria.MinSteps = 3, 3
			ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
			defer cancel()
			res, dir := runLoop(t, ctx, cfg, model, initial, rigConn, "mqtt "+url)
			select {
			case err := <-served:
				if err != nil {
					t.Errorf("the v1 firmware ended with %v", err)
				}
			case <-time.After(10 * time.Second):
				t.Fatal("the v1 firmware did not end within 10 s of the run")
			}
			if res.Summary.Outcome != record.Pass || res.Summary.Steps < 3 {
				t.Fatalf("outcome %s after %d steps (%s)", res.Summary.Outcome, res.Summary.Steps, res.Summary.Reason)
			}
			tap.mu.Lock()
			defer tap.mu.Unlock()
			if tap.configs == 0 || tap.watchdog != 0 || tap.seen[2] != 0 || tap.seen[1] == 0 {
				t.Errorf("the v1 firmware saw %d configs (watchdog %d µs) and frames by version %v; want configs without watchdog, version 1 only",
					tap.configs, tap.watchdog, tap.seen)
			}
			run, err := record.Open(dir)
			if err != nil {
				t.Fatal(err)
			}
			if run.Manifest.Greeting.Protocol != 1 {
				t.Errorf("manifest greeting %+v: want protocol 1", run.Manifest.Greeting)
			}
		})
	}
}

// versionTap counts, by version, the messages a firmware receives, and
// keeps what its configs said about the watchdog.
type versionTap struct {
	bridges.Conn
	mu       sync.Mutex
	seen     map[uint8]int
	configs  int
	watchdog uint32
}

func (c *versionTap) Recv(d time.Time, m *protocol.Message) error {
	err := c.Conn.Recv(d, m)
	if err == nil {
		c.mu.Lock()
		c.seen[m.Version]++
		if m.Type == protocol.TypeConfig {
			c.configs++
			c.watchdog |= m.Config.WatchdogUS
		}
		c.mu.Unlock()
	}
	return err
}

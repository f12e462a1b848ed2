package mqtt

import (
	"crypto/tls"
	"crypto/x509"
	"encoding/json"
	"errors"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/broker"
	"gaitrig/bridges/protocol"
)

// brokerCase is one kind of broker the link is tested against.
type brokerCase struct {
	name  string
	start func(t *testing.T) (url string, port int)
}

var brokerCases = []brokerCase{
	{"embedded", func(t *testing.T) (string, int) {
		b := embedded(t, broker.Config{})
		return "tcp://" + b.Addr(), embeddedPort(t, b)
	}},
	{"mosquitto", func(t *testing.T) (string, int) {
		m := startMosquitto(t, "")
		return m.url("tcp"), m.port
	}},
}

func dialT(t testing.TB, cfg Config) *Conn {
	t.Helper()
	c, err := Dial(cfg)
	if err != nil {
		t.Fatalf("Dial(%s %s): %v", cfg.Role, cfg.Rig, err)
	}
	t.Cleanup(func() { _ = c.Close() })
	return c
}

// pair dials the rig and the firmware ends of rig id on url.
func pair(t testing.TB, url, rig string) (r, f *Conn) {
	t.Helper()
	r = dialT(t, Config{Broker: url, Rig: rig, Role: RoleRig})
	f = dialT(t, Config{Broker: url, Rig: rig, Role: RoleFirmware})
	return r, f
}

func greeting() protocol.Message {
	return protocol.Message{Type: protocol.TypeGreeting, Greeting: protocol.Greeting{
		Version: protocol.Version, Actuators: 2, Name: "bench-walker", Build: "fw-test-1"}}
}

func config() protocol.Message {
	m := protocol.Message{Type: protocol.TypeConfig, Config: protocol.Config{TickHz: 1000, Lockstep: true, Joints: 2, WatchdogUS: 50000}}
	m.Config.JointNames[0], m.Config.JointNames[1] = "hip_left", "hip_right"
	m.Config.TorqueLimit[0], m.Config.TorqueLimit[1] = 30, 30
	return m
}

func state(seq uint32) protocol.Message {
	m := protocol.Message{Type: protocol.TypeState, Seq: seq, State: protocol.State{
		TimeUS: uint64(seq) * 1000, Joints: 2, IMUPitch: -0.05, IMURate: 0.25, Contacts: protocol.ContactLeft}}
	m.State.Angle[0], m.State.Angle[1] = 0.2, -0.15
	m.State.Rate[0], m.State.Rate[1] = 1.25, -0.5
	return m
}

func command(seq uint32) protocol.Message {
	m := protocol.Message{Type: protocol.TypeCommand, Seq: seq, Command: protocol.Command{Joints: 2}}
	m.Command.Torque[0], m.Command.Torque[1] = 2.5, -4.75
	return m
}

func stop(seq uint32, reason uint8, text string) protocol.Message {
	return protocol.Message{Type: protocol.TypeStop, Seq: seq, Stop: protocol.Stop{Reason: reason, Text: text}}
}

// same compares the parts of two messages that their type makes meaningful.
func same(a, b *protocol.Message) bool {
	if a.Type != b.Type || a.Seq != b.Seq {
		return false
	}
	switch a.Type {
	case protocol.TypeGreeting:
		return a.Greeting == b.Greeting
	case protocol.TypeConfig:
		return a.Config == b.Config
	case protocol.TypeState:
		return a.State == b.State
	case protocol.TypeCommand:
		return a.Command == b.Command
	case protocol.TypeStop:
		return a.Stop == b.Stop
	}
	return true
}

func mustRecv(t *testing.T, c *Conn) protocol.Message {
	t.Helper()
	var m protocol.Message
	if err := c.Recv(time.Now().Add(wait), &m); err != nil {
		t.Fatalf("Recv (%s): %v", c.cfg.Role, err)
	}
	return m
}

func mustSend(t *testing.T, c *Conn, m protocol.Message) {
	t.Helper()
	if err := c.Send(&m); err != nil {
		t.Fatalf("Send %s (%s): %v", m.Type.Name(), c.cfg.Role, err)
	}
}

// expectQuiet checks that nothing arrives within a short time.
func expectQuiet(t *testing.T, c *Conn, d time.Duration) {
	t.Helper()
	var m protocol.Message
	if err := c.Recv(time.Now().Add(d), &m); !errors.Is(err, bridges.ErrTimeout) {
		t.Fatalf("expected nothing on the %s side, got %v (%+v)", c.cfg.Role, err, m)
	}
}

func TestConfigErrors(t *testing.T) {
	cases := []struct {
		name string
		cfg  Config
		want string
	}{
		{"no broker", Config{Rig: "b1", Role: RoleRig}, "no broker URL"},
		{"websocket scheme", Config{Broker: "ws://127.0.0.1:1", Rig: "b1", Role: RoleRig}, `scheme "ws"`},
		{"no host", Config{Broker: "tcp://:1883", Rig: "b1", Role: RoleRig}, "no host"},
		{"no rig", Config{Broker: "tcp://127.0.0.1:1", Role: RoleRig}, "rig id"},
		{"rig with slash", Config{Broker: "tcp://127.0.0.1:1", Rig: "a/b", Role: RoleRig}, "rig id"},
		{"root with wildcard", Config{Broker: "tcp://127.0.0.1:1", Root: "g#", Rig: "b1", Role: RoleRig}, "root topic"},
		{"unknown role", Config{Broker: "tcp://127.0.0.1:1", Rig: "b1", Role: "observer"}, `role "observer"`},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			c, err := Dial(tc.cfg)
			if err == nil {
				_ = c.Close()
				t.Fatal("Dial succeeded")
			}
			if !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("error %q does not contain %q", err, tc.want)
			}
		})
	}
}

func TestDialNoBroker(t *testing.T) {
	port := freePort(t) // closed again: nothing listens there
	_, err := Dial(Config{Broker: "tcp://127.0.0.1:" + strconv.Itoa(port), Rig: "b1", Role: RoleRig, ConnectTimeout: time.Second})
	if err == nil || !strings.Contains(err.Error(), "cannot connect") || !strings.Contains(err.Error(), "refused") {
		t.Fatalf("err = %v, want a clear 'cannot connect ... refused'", err)
	}
}

func TestRoundTrip(t *testing.T) {
	for _, bc := range brokerCases {
		t.Run(bc.name, func(t *testing.T) {
			url, _ := bc.start(t)
			r, f := pair(t, url, "bench1")
			steps := []struct {
				from, to *Conn
				msg      protocol.Message
			}{
				{f, r, greeting()},
				{r, f, config()},
				{r, f, state(1)},
				{f, r, command(1)},
				{r, f, state(2)},
				{f, r, command(2)},
				{r, f, protocol.Message{Type: protocol.TypeHeartbeat, Seq: 2}},
				{f, r, protocol.Message{Type: protocol.TypeHeartbeat, Seq: 2}},
				{f, r, stop(2, protocol.StopFirmware, "operator button")},
				{r, f, stop(2, protocol.StopEStop, "slip alarm")},
			}
			for i, s := range steps {
				mustSend(t, s.from, s.msg)
				got := mustRecv(t, s.to)
				if !same(&got, &s.msg) {
					t.Fatalf("step %d: sent %+v, got %+v", i, s.msg, got)
				}
			}
			// Each side also hears its own stop on R/stop; that echo must
			// not come back from Recv.
			expectQuiet(t, r, 200*time.Millisecond)
			expectQuiet(t, f, 200*time.Millisecond)
			rs, fs := r.Stats(), f.Stats()
			if rs.FramesSent != 5 || rs.FramesReceived != 5 || fs.FramesSent != 5 || fs.FramesReceived != 5 {
				t.Fatalf("stats: rig %+v, firmware %+v; want 5 frames each way", rs, fs)
			}
			if rs.FrameErrors != 0 || fs.FrameErrors != 0 {
				t.Fatalf("frame errors: rig %d, firmware %d", rs.FrameErrors, fs.FrameErrors)
			}
		})
	}
}

func TestJSONDebugMode(t *testing.T) {
	b := embedded(t, broker.Config{})
	url := "tcp://" + b.Addr()
	r := dialT(t, Config{Broker: url, Rig: "b1", Role: RoleRig, JSON: true})
	f := dialT(t, Config{Broker: url, Rig: "b1", Role: RoleFirmware, JSON: true})
	s := startSub(t, embeddedPort(t, b), "gaitrig/b1/state", 1)
	// mosquitto_sub needs a moment to subscribe; resend until it has seen
	// one (at most 200 times, 20 s: a bound on a hang, as a process
	// starting on a busy host may take seconds).
	want := state(7)
	for i := 0; i < 200; i++ {
		mustSend(t, r, want)
		got := mustRecv(t, f)
		if !same(&got, &want) {
			t.Fatalf("JSON mode: sent %+v, got %+v", want, got)
		}
		select {
		case l := <-s.lines:
			var doc map[string]any
			if err := json.Unmarshal([]byte(l), &doc); err != nil || doc["type"] != "state" {
				t.Fatalf("mosquitto_sub saw %q, want the JSON form of a state (%v)", l, err)
			}
			// mosquitto_pub now stands in for the firmware, under its
			// client id, so the firmware client leaves first.
			if err := f.Close(); err != nil {
				t.Fatal(err)
			}
			// The broker refuses a second holder of an id (no takeover):
			// wait for it to release firmware.b1 before mosquitto_pub uses it.
			for deadline := time.Now().Add(wait); b.Holds("firmware.b1"); time.Sleep(5 * time.Millisecond) {
				if time.Now().After(deadline) {
					t.Fatal("the broker still holds client id firmware.b1 after the firmware client closed")
				}
			}
			jsonFromOutside(t, r, embeddedPort(t, b))
			return
		case <-time.After(100 * time.Millisecond):
		}
	}
	t.Fatal("mosquitto_sub never saw a JSON state")
}

// jsonFromOutside types commands by hand with mosquitto_pub, as a firmware
// engineer might while debugging, and checks what the rig makes of them.
func jsonFromOutside(t *testing.T, r *Conn, port int) {
	cases := []struct {
		name, payload string
		want          string // "" means a command with seq 8 and torque 1.5
	}{
		{"valid command", `{"type":"command","seq":8,"joints":1,"status":0,"torque":[1.5]}`, ""},
		{"not JSON", `torque 1.5 please`, "rejected frame"},
		{"unknown field", `{"type":"command","seq":9,"joints":1,"status":0,"torque":[1.5],"speed":3}`, "rejected frame"},
		{"too few torques", `{"type":"command","seq":9,"joints":2,"status":0,"torque":[1.5]}`, "rejected frame"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			mosquittoPub(t, port, "-i", "firmware.b1", "-t", "gaitrig/b1/command", "-m", tc.payload)
			var m protocol.Message
			err := r.Recv(time.Now().Add(wait), &m)
			if tc.want == "" {
				if err != nil || m.Type != protocol.TypeCommand || m.Seq != 8 || m.Command.Torque[0] != 1.5 {
					t.Fatalf("Recv = %v, %+v", err, m)
				}
				return
			}
			var fe *bridges.FrameError
			if !errors.As(err, &fe) || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("Recv = %v, want a FrameError", err)
			}
			t.Logf("%s: %v", tc.name, err)
		})
	}
}

func TestBadFramesAndWrongDirection(t *testing.T) {
	b := embedded(t, broker.Config{})
	r, f := pair(t, "tcp://"+b.Addr(), "b1")
	good := command(5)
	var buf [protocol.MaxFrameLen]byte
	n, err := protocol.Encode(buf[:], &good)
	if err != nil {
		t.Fatal(err)
	}
	corrupt := append([]byte(nil), buf[:n]...)
	corrupt[12] ^= 0x40
	cases := []struct {
		name  string
		send  func() error
		error string // "" means the message arrives intact
	}{
		{"garbage", func() error { return f.SendFrame([]byte("hello")) }, "rejected frame"},
		{"bit flip", func() error { return f.SendFrame(corrupt) }, "CRC"},
		{"empty payload", func() error { return f.SendFrame(nil) }, "rejected frame"},
		{"state from the firmware", func() error { m := state(3); return f.Send(&m) }, "a state message on gaitrig/b1/command"},
		{"config from the firmware", func() error { m := config(); return f.Send(&m) }, "a config message on gaitrig/b1/command"},
		{"valid command after all that", func() error { return f.SendFrame(buf[:n]) }, ""},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			if err := tc.send(); err != nil {
				t.Fatalf("send: %v", err)
			}
			var m protocol.Message
			err := r.Recv(time.Now().Add(wait), &m)
			if tc.error == "" {
				if err != nil || !same(&m, &good) {
					t.Fatalf("Recv = %v, %+v; want the command", err, m)
				}
				return
			}
			var fe *bridges.FrameError
			if !errors.As(err, &fe) || !strings.Contains(err.Error(), tc.error) {
				t.Fatalf("Recv error %v, want a FrameError containing %q", err, tc.error)
			}
			if tc.name == "bit flip" && !errors.Is(err, protocol.ErrBadCRC) {
				t.Errorf("FrameError %v does not unwrap to protocol.ErrBadCRC", err)
			}
		})
	}
	if got := r.Stats().FrameErrors; got != 5 {
		t.Fatalf("FrameErrors = %d, want 5", got)
	}
	// A message the encoder refuses never leaves.
	bad := command(1)
	bad.Command.Joints = 9
	if err := f.Send(&bad); err == nil {
		t.Fatal("Send of a command with 9 joints succeeded")
	}
	if err := f.SendFrame(make([]byte, protocol.MaxFrameLen+1)); err == nil {
		t.Fatal("SendFrame of an oversize frame succeeded")
	}
}

func TestRecvQueueFull(t *testing.T) {
	b := embedded(t, broker.Config{})
	url := "tcp://" + b.Addr()
	r := dialT(t, Config{Broker: url, Rig: "b1", Role: RoleRig, QueueLen: 4})
	f := dialT(t, Config{Broker: url, Rig: "b1", Role: RoleFirmware})
	const sent = 40
	for i := 1; i <= sent; i++ {
		mustSend(t, f, command(uint32(i)))
	}
	// Wait (bounded) until the rig side has received or dropped all of them.
	for deadline := time.Now().Add(wait); len(r.rx)+int(r.dropped.Load()) < sent; {
		if time.Now().After(deadline) {
			t.Fatalf("only %d queued + %d dropped of %d", len(r.rx), r.dropped.Load(), sent)
		}
		time.Sleep(time.Millisecond)
	}
	var m protocol.Message
	err := r.Recv(time.Now().Add(wait), &m)
	if err == nil || !strings.Contains(err.Error(), "receive queue full: 36 messages dropped") {
		t.Fatalf("first Recv = %v, want the drop report", err)
	}
	// Discarded valid messages are Stats.Dropped, not frame errors (which
	// are damaged or misplaced frames).
	if st := r.Stats(); st.Dropped != sent-4 || st.FrameErrors != 0 {
		t.Errorf("Stats after the drops: Dropped %d, FrameErrors %d; want %d and 0", st.Dropped, st.FrameErrors, sent-4)
	}
	for i := 1; i <= 4; i++ {
		got := mustRecv(t, r)
		if want := command(uint32(i)); !same(&got, &want) {
			t.Fatalf("queued message %d: %+v", i, got)
		}
	}
	expectQuiet(t, r, 50*time.Millisecond)
}

func TestClosed(t *testing.T) {
	b := embedded(t, broker.Config{})
	r, _ := pair(t, "tcp://"+b.Addr(), "b1")
	if err := r.Close(); err != nil {
		t.Fatalf("Close: %v", err)
	}
	if err := r.Close(); err != nil {
		t.Fatalf("second Close: %v", err)
	}
	var m protocol.Message
	if err := r.Recv(time.Now().Add(wait), &m); !errors.Is(err, bridges.ErrClosed) {
		t.Fatalf("Recv after Close = %v", err)
	}
	msg := state(1)
	if err := r.Send(&msg); !errors.Is(err, bridges.ErrClosed) {
		t.Fatalf("Send after Close = %v", err)
	}
	if err := r.PublishAlarm([]byte(`{}`)); !errors.Is(err, bridges.ErrClosed) {
		t.Fatalf("PublishAlarm after Close = %v", err)
	}
}

func TestAlarmSeenByMosquittoSub(t *testing.T) {
	for _, bc := range brokerCases {
		t.Run(bc.name, func(t *testing.T) {
			url, port := bc.start(t)
			r := dialT(t, Config{Broker: url, Rig: "b7", Role: RoleRig})
			s := startSub(t, port, "gaitrig/b7/alarm", 1)
			alarm := []byte(`{"kind":"slip","severity":"trip","tick":4211,"t":4.211,"foot":1,"utilization":1.07}`)
			// The alarm topic is not retained, so publish until
			// mosquitto_sub, once subscribed, has read one (at most 200
			// times, 20 s: a bound on a hang on a busy host).
			var line string
			for i := 0; i < 200 && line == ""; i++ {
				if err := r.PublishAlarm(alarm); err != nil {
					t.Fatalf("PublishAlarm: %v", err)
				}
				select {
				case line = <-s.lines:
				case <-time.After(100 * time.Millisecond):
				}
			}
			if line == "" {
				t.Fatal("mosquitto_sub read no alarm")
			}
			var doc map[string]any
			if err := json.Unmarshal([]byte(line), &doc); err != nil {
				t.Fatalf("mosquitto_sub read %q, not valid JSON: %v", line, err)
			}
			if doc["kind"] != "slip" || doc["tick"] != 4211.0 {
				t.Fatalf("alarm read back as %v", doc)
			}
			if err := s.wait(); err != nil {
				t.Fatalf("mosquitto_sub: %v", err)
			}
		})
	}
}

func TestAlarmAndStatusRefused(t *testing.T) {
	b := embedded(t, broker.Config{})
	r, f := pair(t, "tcp://"+b.Addr(), "b1")
	cases := []struct {
		name string
		call func() error
		want string
	}{
		{"alarm not JSON", func() error { return r.PublishAlarm([]byte("slip!")) }, "not valid JSON"},
		{"status not JSON", func() error { return r.PublishStatus([]byte(`{"state":`)) }, "not valid JSON"},
		{"alarm from firmware", func() error { return f.PublishAlarm([]byte(`{}`)) }, "only the rig role"},
		{"status from firmware", func() error { return f.PublishStatus([]byte(`{}`)) }, "only the rig role"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			err := tc.call()
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("err = %v, want %q", err, tc.want)
			}
		})
	}
}

// statusState reads the "state" and "reason" fields of a status line.
func statusState(t *testing.T, line string) (state, reason string) {
	t.Helper()
	var doc struct{ State, Reason string }
	if err := json.Unmarshal([]byte(line), &doc); err != nil {
		t.Fatalf("status %q is not valid JSON: %v", line, err)
	}
	return doc.State, doc.Reason
}

func nextEvent(t *testing.T, c *Conn, kind bridges.LinkEventKind) bridges.LinkEvent {
	t.Helper()
	timeout := time.After(3 * wait)
	for {
		select {
		case e := <-c.Events():
			if e.Kind == kind {
				return e
			}
			t.Logf("skipping event %+v while waiting for %q", e, kind)
		case <-timeout:
			t.Fatalf("no %q event in time (%s side)", kind, c.cfg.Role)
		}
	}
}

func TestStatusAndLastWill(t *testing.T) {
	for _, bc := range brokerCases {
		t.Run(bc.name, func(t *testing.T) {
			url, port := bc.start(t)
			var p plug
			r := dialT(t, Config{Broker: url, Rig: "b3", Role: RoleRig, Dialer: p.dial, MaxReconnectInterval: 200 * time.Millisecond})
			// The online status is retained: a late subscriber sees it.
			s := startSub(t, port, "gaitrig/b3/status", 1)
			if st, _ := statusState(t, s.line(t)); st != "online" {
				t.Fatalf("retained status %q, want online", st)
			}
			if err := r.PublishStatus([]byte(`{"state":"running","scenario":"level-ground"}`)); err != nil {
				t.Fatalf("PublishStatus: %v", err)
			}
			s = startSub(t, port, "gaitrig/b3/status", 2)
			if st, _ := statusState(t, s.line(t)); st != "running" {
				t.Fatalf("retained status %q, want running", st)
			}
			// Pull the cable: the broker must publish the last will.
			cut := time.Now()
			p.pull()
			if st, why := statusState(t, s.line(t)); st != "offline" || why != "connection lost" {
				t.Fatalf("after the cut: state %q reason %q, want offline / connection lost", st, why)
			}
			e := nextEvent(t, r, bridges.LinkDisconnected)
			if e.Err == nil || !strings.Contains(e.Err.Error(), "lost the connection") {
				t.Fatalf("disconnected event %+v lacks a clear cause", e)
			}
			msg := state(1)
			if err := r.Send(&msg); err == nil || !strings.Contains(err.Error(), "reconnecting") {
				t.Fatalf("Send while cut = %v, want a 'not sent ... reconnecting' error", err)
			}
			time.Sleep(300 * time.Millisecond) // the cable stays out a while
			p.push()
			e = nextEvent(t, r, bridges.LinkReconnected)
			if min := 300 * time.Millisecond; e.Gap < min || e.Gap > time.Since(cut) {
				t.Fatalf("gap %v, want between %v and %v", e.Gap, min, time.Since(cut))
			}
			if got := r.Stats().Reconnects; got != 1 {
				t.Fatalf("Reconnects = %d, want 1", got)
			}
			// After the reconnect the last status is restored.
			s = startSub(t, port, "gaitrig/b3/status", 1)
			if st, _ := statusState(t, s.line(t)); st != "running" {
				t.Fatalf("status after reconnect %q, want running", st)
			}
			// A clean Close leaves a retained offline status saying so.
			if err := r.Close(); err != nil {
				t.Fatalf("Close: %v", err)
			}
			s = startSub(t, port, "gaitrig/b3/status", 1)
			if st, why := statusState(t, s.line(t)); st != "offline" || why != "closed" {
				t.Fatalf("after Close: %q / %q, want offline / closed", st, why)
			}
		})
	}
}

func TestBrokerKilledAndRestarted(t *testing.T) {
	m := startMosquitto(t, "")
	cfg := Config{Broker: m.url("tcp"), Rig: "b4", MaxReconnectInterval: 200 * time.Millisecond}
	cfg.Role = RoleRig
	r := dialT(t, cfg)
	cfg.Role = RoleFirmware
	f := dialT(t, cfg)
	mustSend(t, r, state(1))
	if got := mustRecv(t, f); got.Seq != 1 {
		t.Fatalf("before the kill: %+v", got)
	}
	killed := time.Now()
	m.kill()
	for _, c := range []*Conn{r, f} {
		e := nextEvent(t, c, bridges.LinkDisconnected)
		if e.Err == nil {
			t.Fatalf("%s: disconnected event without a cause", c.cfg.Role)
		}
	}
	msg := state(2)
	if err := r.Send(&msg); err == nil {
		t.Fatal("Send with the broker dead succeeded")
	}
	time.Sleep(200 * time.Millisecond)
	m.start()
	for _, c := range []*Conn{r, f} {
		e := nextEvent(t, c, bridges.LinkReconnected)
		if e.Gap <= 200*time.Millisecond || e.Gap > time.Since(killed) {
			t.Fatalf("%s: gap %v, want more than 200ms and at most %v", c.cfg.Role, e.Gap, time.Since(killed))
		}
	}
	// Both sides have renewed their subscriptions: the link works again.
	mustSend(t, r, state(3))
	if got := mustRecv(t, f); got.Seq != 3 {
		t.Fatalf("after the restart: %+v", got)
	}
	mustSend(t, f, command(3))
	if got := mustRecv(t, r); got.Seq != 3 || got.Type != protocol.TypeCommand {
		t.Fatalf("after the restart: %+v", got)
	}
}

func TestEmbeddedBrokerRestarted(t *testing.T) {
	b, err := broker.Start(broker.Config{})
	if err != nil {
		t.Fatal(err)
	}
	addr := b.Addr()
	r := dialT(t, Config{Broker: "tcp://" + addr, Rig: "b5", Role: RoleRig, MaxReconnectInterval: 200 * time.Millisecond})
	_ = b.Close()
	nextEvent(t, r, bridges.LinkDisconnected)
	b2 := embedded(t, broker.Config{Addr: addr})
	_ = b2
	e := nextEvent(t, r, bridges.LinkReconnected)
	if e.Gap <= 0 {
		t.Fatalf("gap %v", e.Gap)
	}
	f := dialT(t, Config{Broker: "tcp://" + addr, Rig: "b5", Role: RoleFirmware})
	mustSend(t, r, state(9))
	if got := mustRecv(t, f); got.Seq != 9 {
		t.Fatalf("after the restart: %+v", got)
	}
}

func TestAccessRulesOnEmbeddedBroker(t *testing.T) {
	// Accounts, so that outside peers can log in as a rig's firmware with
	// client ids of their own (two clients with one id would take the
	// session from each other).
	b := embedded(t, broker.Config{Accounts: []broker.Account{
		{Username: "bench1", Password: "pw-r1", Role: broker.RoleRig, Rig: "b1"},
		{Username: "board1", Password: "pw-f1", Role: broker.RoleFirmware, Rig: "b1"},
		{Username: "bench2", Password: "pw-r2", Role: broker.RoleRig, Rig: "b2"},
		{Username: "board2", Password: "pw-f2", Role: broker.RoleFirmware, Rig: "b2"},
	}})
	url, port := "tcp://"+b.Addr(), embeddedPort(t, b)
	login := func(role Role, rig, user, pass string) Config {
		return Config{Broker: url, Rig: rig, Role: role, Username: user, Password: pass}
	}

	// The firmware of b1 cannot attach itself to rig b2: its default
	// client id, firmware.b2, is not the account's, so the CONNECT is refused.
	_, err := Dial(login(RoleFirmware, "b2", "board1", "pw-f1"))
	if err == nil || !strings.Contains(err.Error(), "rejected the client id") {
		t.Fatalf("Dial as board1 onto rig b2 = %v, want a rejected client id", err)
	}
	r1 := dialT(t, login(RoleRig, "b1", "bench1", "pw-r1"))
	f1 := dialT(t, login(RoleFirmware, "b1", "board1", "pw-f1"))
	r2 := dialT(t, login(RoleRig, "b2", "bench2", "pw-r2"))

	// Outside peers with mosquitto_pub: the firmware of b1 publishes on rig
	// b2's command topic and on its own rig's state topic; both are
	// dropped. Then the firmware of b2 proves the path works.
	dir := t.TempDir()
	frame := func(name string, m protocol.Message) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, encoded(t, m), 0o600); err != nil {
			t.Fatal(err)
		}
		return p
	}
	cmdFile, stateFile := frame("command.bin", command(11)), frame("state.bin", state(11))
	refusedBefore := b.Refusals()
	mosquittoPub(t, port, "-i", "outside-1", "-u", "board1", "-P", "pw-f1", "-t", "gaitrig/b2/command", "-f", cmdFile)
	mosquittoPub(t, port, "-i", "outside-2", "-u", "board1", "-P", "pw-f1", "-t", "gaitrig/b1/state", "-f", stateFile)
	mosquittoPub(t, port, "-i", "outside-3", "-u", "board2", "-P", "pw-f2", "-t", "gaitrig/b2/command", "-f", cmdFile)
	got := mustRecv(t, r2)
	if want := command(11); !same(&got, &want) {
		t.Fatalf("rig b2 got %+v", got)
	}
	// The refused publishes came on other connections; give the broker a
	// bounded time to count them, then nothing must be waiting anywhere.
	for deadline := time.Now().Add(wait); b.Refusals()-refusedBefore < 2 && time.Now().Before(deadline); {
		time.Sleep(time.Millisecond)
	}
	if got := b.Refusals() - refusedBefore; got != 2 {
		t.Fatalf("broker refused %d publishes, want 2", got)
	}
	expectQuiet(t, r2, 100*time.Millisecond)
	expectQuiet(t, f1, 100*time.Millisecond)
	expectQuiet(t, r1, 100*time.Millisecond)
}

func TestCredentials(t *testing.T) {
	dir := t.TempDir()
	type setup struct {
		name  string
		start func(t *testing.T) string
	}
	setups := []setup{
		{"embedded", func(t *testing.T) string {
			b := embedded(t, broker.Config{Accounts: []broker.Account{
				{Username: "bench", Password: "correct-horse", Role: broker.RoleRig, Rig: "b1"},
				{Username: "board", Password: "battery-staple", Role: broker.RoleFirmware, Rig: "b1"},
			}})
			return "tcp://" + b.Addr()
		}},
		{"mosquitto", func(t *testing.T) string {
			pw := filepath.Join(dir, "passwd")
			bin := requireTool(t, "/usr/bin/mosquitto_passwd")
			for i, u := range [][2]string{{"bench", "correct-horse"}, {"board", "battery-staple"}} {
				args := []string{"-b", pw, u[0], u[1]}
				if i == 0 {
					args = []string{"-c", "-b", pw, u[0], u[1]}
				}
				if out, err := exec.Command(bin, args...).CombinedOutput(); err != nil {
					t.Fatalf("mosquitto_passwd: %v %s", err, out)
				}
			}
			m := startMosquitto(t, "allow_anonymous false\npassword_file "+pw+"\n")
			return m.url("tcp")
		}},
	}
	for _, s := range setups {
		t.Run(s.name, func(t *testing.T) {
			url := s.start(t)
			r := dialT(t, Config{Broker: url, Rig: "b1", Role: RoleRig, Username: "bench", Password: "correct-horse"})
			f := dialT(t, Config{Broker: url, Rig: "b1", Role: RoleFirmware, Username: "board", Password: "battery-staple"})
			mustSend(t, r, state(1))
			if got := mustRecv(t, f); got.Seq != 1 {
				t.Fatalf("got %+v", got)
			}
			for _, bad := range []struct{ user, pass string }{{"bench", "wrong"}, {"nobody", "x"}, {"", ""}} {
				_, err := Dial(Config{Broker: url, Rig: "b1", Role: RoleRig, ClientID: "rig.b1-intruder", Username: bad.user, Password: bad.pass})
				if err == nil {
					t.Fatalf("Dial with user %q password %q succeeded", bad.user, bad.pass)
				}
				if msg := err.Error(); !strings.Contains(msg, "refused") || !strings.Contains(msg, "username or password") {
					t.Fatalf("error %q does not explain the refused login", msg)
				}
				t.Logf("user %q: %v", bad.user, err)
			}
		})
	}
}

func TestTLS(t *testing.T) {
	dir := t.TempDir()
	certFile, keyFile, certPEM := selfSigned(t, dir)
	pool := x509.NewCertPool()
	pool.AppendCertsFromPEM(certPEM)
	trusted := &tls.Config{RootCAs: pool, MinVersion: tls.VersionTLS12}
	setups := []struct {
		name  string
		start func(t *testing.T) string
	}{
		{"embedded", func(t *testing.T) string {
			b := embedded(t, broker.Config{TLSCertFile: certFile, TLSKeyFile: keyFile})
			return "mqtts://" + b.Addr()
		}},
		{"mosquitto", func(t *testing.T) string {
			m := startMosquitto(t, "certfile "+certFile+"\nkeyfile "+keyFile+"\n")
			return m.url("ssl")
		}},
	}
	for _, s := range setups {
		t.Run(s.name, func(t *testing.T) {
			url := s.start(t)
			r := dialT(t, Config{Broker: url, Rig: "b1", Role: RoleRig, TLS: trusted})
			f := dialT(t, Config{Broker: url, Rig: "b1", Role: RoleFirmware, TLS: trusted})
			mustSend(t, r, state(1))
			if got := mustRecv(t, f); got.Seq != 1 {
				t.Fatalf("got %+v", got)
			}
			// Without trusting the self-signed certificate the handshake fails.
			_, err := Dial(Config{Broker: url, Rig: "b1", Role: RoleRig, ClientID: "rig.b1-untrusting", ConnectTimeout: 2 * time.Second})
			if err == nil || !strings.Contains(err.Error(), "TLS handshake") {
				t.Fatalf("untrusted Dial = %v, want a TLS handshake error", err)
			}
			// Plain TCP to the TLS port does not get through either.
			plain := strings.Replace(strings.Replace(url, "mqtts://", "tcp://", 1), "ssl://", "tcp://", 1)
			if _, err := Dial(Config{Broker: plain, Rig: "b1", Role: RoleRig, ClientID: "rig.b1-plain", ConnectTimeout: 2 * time.Second}); err == nil {
				t.Fatal("plain TCP Dial to a TLS listener succeeded")
			}
		})
	}
}

func TestBrokerStalled(t *testing.T) {
	m := startMosquitto(t, "")
	r := dialT(t, Config{Broker: m.url("tcp"), Rig: "b6", Role: RoleRig,
		KeepAlive: 1 * time.Second, MaxReconnectInterval: 200 * time.Millisecond, ConnectTimeout: time.Second})
	// SIGSTOP: the broker keeps its sockets open but answers nothing, as a
	// hung broker host would. Only the keep-alive can notice.
	if err := m.signal(syscall.SIGSTOP); err != nil {
		t.Fatal(err)
	}
	stalled := time.Now()
	e := nextEvent(t, r, bridges.LinkDisconnected)
	if e.Err == nil || !strings.Contains(e.Err.Error(), "lost the connection") {
		t.Fatalf("disconnected event %+v lacks a clear cause", e)
	}
	if err := m.signal(syscall.SIGCONT); err != nil {
		t.Fatal(err)
	}
	e = nextEvent(t, r, bridges.LinkReconnected)
	if e.Gap <= 0 || e.Gap > time.Since(stalled) {
		t.Fatalf("gap %v, want between 0 and %v", e.Gap, time.Since(stalled))
	}
	f := dialT(t, Config{Broker: m.url("tcp"), Rig: "b6", Role: RoleFirmware})
	mustSend(t, f, command(1))
	if got := mustRecv(t, r); got.Type != protocol.TypeCommand || got.Seq != 1 {
		t.Fatalf("after the stall: %+v", got)
	}
}

func TestOperatorStopFromOutside(t *testing.T) {
	m := startMosquitto(t, "")
	r := dialT(t, Config{Broker: m.url("tcp"), Rig: "b8", Role: RoleRig})
	p := filepath.Join(t.TempDir(), "stop.bin")
	want := stop(0, protocol.StopAborted, "operator e-stop")
	if err := os.WriteFile(p, encoded(t, want), 0o600); err != nil {
		t.Fatal(err)
	}
	mosquittoPub(t, m.port, "-t", "gaitrig/b8/stop", "-q", "1", "-f", p)
	if got := mustRecv(t, r); !same(&got, &want) {
		t.Fatalf("rig got %+v, want the operator's stop", got)
	}
}

func TestConfigDefaults(t *testing.T) {
	cases := []struct {
		keepAlive, want time.Duration
		clientID        string
	}{
		{0, DefaultKeepAlive, "rig.b1"},
		{500 * time.Millisecond, time.Second, "rig.b1"},
		{1200 * time.Millisecond, 2 * time.Second, "rig.b1"},
		{3 * time.Second, 3 * time.Second, "rig.b1"},
	}
	for _, tc := range cases {
		cfg := Config{Broker: "tcp://127.0.0.1", Rig: "b1", Role: RoleRig, KeepAlive: tc.keepAlive}
		u, err := cfg.normalize()
		if err != nil {
			t.Fatal(err)
		}
		if cfg.KeepAlive != tc.want || cfg.ClientID != tc.clientID || u.Host != "127.0.0.1:1883" || cfg.Root != DefaultRoot {
			t.Errorf("KeepAlive %v: got %v, client %q, host %q, root %q", tc.keepAlive, cfg.KeepAlive, cfg.ClientID, u.Host, cfg.Root)
		}
	}
	cfg := Config{Broker: "mqtts://broker.lab", Rig: "b1", Role: RoleFirmware}
	u, err := cfg.normalize()
	if err != nil || u.Host != "broker.lab:8883" || cfg.ClientID != "firmware.b1" {
		t.Fatalf("TLS defaults: %v %v %q", err, u, cfg.ClientID)
	}
}

// TestDialSilentBroker: something accepts the TCP connection but never
// answers the MQTT CONNECT (a hung broker, or the wrong service on the
// port). Dial must give up within its timeout with a clear error.
func TestDialSilentBroker(t *testing.T) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	accepted := make(chan net.Conn, 4)
	go func() {
		for {
			c, err := ln.Accept()
			if err != nil {
				close(accepted)
				return
			}
			accepted <- c // hold it open, say nothing
		}
	}()
	defer func() {
		ln.Close()
		for c := range accepted {
			c.Close()
		}
	}()
	_, err = Dial(Config{Broker: "tcp://" + ln.Addr().String(), Rig: "b1", Role: RoleRig, ConnectTimeout: 500 * time.Millisecond})
	if err == nil {
		t.Fatal("Dial to a silent listener succeeded")
	}
	if !strings.Contains(err.Error(), ln.Addr().String()) || !strings.Contains(err.Error(), "no MQTT answer came within 500ms") {
		t.Fatalf("error %q does not name the broker and the silence", err)
	}
	t.Logf("silent broker: %v", err)
}

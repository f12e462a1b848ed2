package broker

import (
	"context"
	"errors"
	"log/slog"
	"os"
	"os/exec"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/eclipse/paho.mqtt.golang/packets"
)

// refusalSink collects what Config.OnRefusal reports.
type refusalSink struct {
	mu   sync.Mutex
	seen []Refusal
}

func (s *refusalSink) add(r Refusal) {
	s.mu.Lock()
	s.seen = append(s.seen, r)
	s.mu.Unlock()
}

// only returns the refusals seen so far and fails unless there is exactly
// one, of kind.
func (s *refusalSink) only(t *testing.T, kind RefusalKind) Refusal {
	t.Helper()
	s.mu.Lock()
	defer s.mu.Unlock()
	if len(s.seen) != 1 || s.seen[0].Kind != kind {
		t.Fatalf("refusals %+v, want exactly one of kind %s", s.seen, kind)
	}
	r := s.seen[0]
	s.seen = nil
	return r
}

// refusedID checks that a paho connect was answered with MQTT 3.1.1 return
// code 2, "identifier rejected", rather than dropped or accepted.
func refusedID(t *testing.T, err error, who string) {
	t.Helper()
	if err == nil {
		t.Fatalf("%s: connect succeeded, want identifier rejected", who)
	}
	if !errors.Is(err, packets.ErrorRefusedIDRejected) {
		t.Fatalf("%s: connect failed with %v, want identifier rejected", who, err)
	}
}

func TestClientIDWithoutAccounts(t *testing.T) {
	var sink refusalSink
	var log syncBuffer
	b := startBroker(t, Config{OnRefusal: sink.add,
		Logger: slog.New(slog.NewTextHandler(&log, &slog.HandlerOptions{Level: slog.LevelWarn}))})
	mon := watch(t, b, "gaitrig/#")

	t.Run("not one of ours", func(t *testing.T) {
		_, err := dial(t, b, clientOpts{id: "board1"})
		refusedID(t, err, "board1")
		r := sink.only(t, RefusedClientID)
		if r.ClientID != "board1" || r.Remote == "" || !strings.Contains(r.Reason, `"firmware.<rig>"`) {
			t.Errorf("refusal %+v does not name the client, its address and the id to use", r)
		}
		// Logged when it happened, not only at Close.
		if out := log.String(); !strings.Contains(out, "broker refused client_id") || !strings.Contains(out, "client=board1") {
			t.Errorf("log %q lacks the refusal", out)
		}
	})

	fw := mustDial(t, b, clientOpts{id: "firmware.b1"})
	t.Run("second firmware with the same id", func(t *testing.T) {
		_, err := dial(t, b, clientOpts{id: "firmware.b1"})
		refusedID(t, err, "second firmware.b1")
		if r := sink.only(t, RefusedTakeover); !strings.Contains(r.Reason, "already connected") {
			t.Errorf("reason %q", r.Reason)
		}
		// The first connection kept its session: its publish still arrives.
		if tok := fw.Publish("gaitrig/b1/command", 0, false, "still here"); !tok.WaitTimeout(wait) || tok.Error() != nil {
			t.Fatalf("publish: %v", tok.Error())
		}
		if seen := mon.next(t); seen[len(seen)-1] != "gaitrig/b1/command still here" {
			t.Fatalf("monitor saw %q", seen)
		}
	})
	t.Run("id free again after a clean disconnect", func(t *testing.T) {
		fw.Disconnect(50)
		// The broker releases the id when it has processed the DISCONNECT
		// (before it forgets the client); wait for that, bounded.
		for deadline := time.Now().Add(wait); ; time.Sleep(time.Millisecond) {
			if _, held := b.server.Clients.Get("firmware.b1"); !held {
				break
			}
			if time.Now().After(deadline) {
				t.Fatal("the broker never dropped the disconnected firmware.b1")
			}
		}
		mustDial(t, b, clientOpts{id: "firmware.b1"})
	})
	t.Run("rig and monitor forms are ours", func(t *testing.T) {
		for _, id := range []string{"rig.b1", "monitor", "monitor.laptop-2"} {
			mustDial(t, b, clientOpts{id: id})
		}
	})
	if got := b.RefusalsByKind(); got[RefusedClientID] != 1 || got[RefusedTakeover] != 1 || len(got) != 2 {
		t.Errorf("RefusalsByKind = %v, want one client_id and one takeover", got)
	}
}

func TestClientIDWithAccounts(t *testing.T) {
	var sink refusalSink
	b := startBroker(t, Config{OnRefusal: sink.add, Accounts: []Account{
		{Username: "bench", Password: "pw-r", Role: RoleRig, Rig: "b1"},
		{Username: "board", Password: "pw-f", Role: RoleFirmware, Rig: "b1"},
		{Username: "board2", Password: "pw-f2", Role: RoleFirmware, Rig: "b2"},
		{Username: "viewer", Password: "pw-m", Role: RoleMonitor},
		{Username: "pinned", Password: "pw-p", Role: RoleFirmware, Rig: "b3", ClientIDs: []string{"board-7"}},
	}})
	refused := []struct {
		name string
		o    clientOpts
		kind RefusalKind
	}{
		{"monitor account as the rig", clientOpts{id: "rig.b1", user: "viewer", pass: "pw-m"}, RefusedClientID},
		{"firmware account as the rig", clientOpts{id: "rig.b1", user: "board", pass: "pw-f"}, RefusedClientID},
		{"firmware account as another rig's firmware", clientOpts{id: "firmware.b2", user: "board", pass: "pw-f"}, RefusedClientID},
		{"account with pinned ids under another id", clientOpts{id: "firmware.b3", user: "pinned", pass: "pw-p"}, RefusedClientID},
	}
	for _, tc := range refused {
		t.Run(tc.name, func(t *testing.T) {
			_, err := dial(t, b, tc.o)
			refusedID(t, err, tc.name)
			if r := sink.only(t, tc.kind); r.Username != tc.o.user || r.ClientID != tc.o.id {
				t.Errorf("refusal %+v", r)
			}
		})
	}
	mustDial(t, b, clientOpts{id: "rig.b1", user: "bench", pass: "pw-r"})
	mustDial(t, b, clientOpts{id: "firmware.b1", user: "board", pass: "pw-f"})
	mustDial(t, b, clientOpts{id: "board-7", user: "pinned", pass: "pw-p"})
	mustDial(t, b, clientOpts{id: "monitor.wall", user: "viewer", pass: "pw-m"})

	// A free id held by one account cannot be taken by another; the same
	// account may take it back (a client reconnecting over a dead line).
	first := mustDial(t, b, clientOpts{id: "bench-board", user: "board", pass: "pw-f"})
	_, err := dial(t, b, clientOpts{id: "bench-board", user: "board2", pass: "pw-f2"})
	refusedID(t, err, "another account taking bench-board")
	sink.only(t, RefusedTakeover)
	if !first.IsConnectionOpen() {
		t.Fatal("the refused takeover disconnected the first client")
	}
	mustDial(t, b, clientOpts{id: "bench-board", user: "board", pass: "pw-f"})
}

// TestRefusalsSeenByMosquittoClients: Mosquitto's own clients, as an
// outside firmware author would use them, are told why they were refused.
func TestRefusalsSeenByMosquittoClients(t *testing.T) {
	pub, sub := tool(t, "mosquitto_pub"), tool(t, "mosquitto_sub")
	b := startBroker(t, Config{})
	_, port, _ := strings.Cut(b.Addr(), ":")
	fw := mustDial(t, b, clientOpts{id: "firmware.b1"})
	cases := []struct {
		name string
		args []string
		want string
	}{
		{"unknown id, MQTT 3.1.1", []string{pub, "-V", "mqttv311", "-i", "board1", "-t", "gaitrig/b1/command", "-m", "x"}, "identifier rejected"},
		{"unknown id, MQTT 5", []string{pub, "-V", "mqttv5", "-i", "board1", "-t", "gaitrig/b1/command", "-m", "x"}, "Client Identifier not valid"},
		{"second firmware", []string{sub, "-V", "mqttv311", "-i", "firmware.b1", "-t", "gaitrig/b1/state", "-W", "5"}, "identifier rejected"},
		{"default id of the tool", []string{sub, "-V", "mqttv311", "-t", "gaitrig/#", "-W", "5"}, "identifier rejected"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			ctx, cancel := context.WithTimeout(context.Background(), 2*wait)
			defer cancel()
			args := append([]string{"-h", "127.0.0.1", "-p", port}, tc.args[1:]...)
			out, err := exec.CommandContext(ctx, tc.args[0], args...).CombinedOutput()
			if err == nil || !strings.Contains(string(out), tc.want) {
				t.Fatalf("%s: %v, output %q; want a refusal saying %q", tc.args[0], err, out, tc.want)
			}
		})
	}
	// A monitor id gets in and reads what the firmware publishes. The
	// subscriber needs a moment to subscribe, so the firmware publishes
	// until it has one message (-C 1), bounded by its -W and the context.
	ctx, cancel := context.WithTimeout(context.Background(), 2*wait)
	defer cancel()
	cmd := exec.CommandContext(ctx, sub, "-h", "127.0.0.1", "-p", port, "-V", "mqttv311",
		"-i", "monitor.sub", "-t", "gaitrig/b1/command", "-C", "1", "-W", "5")
	var out syncBuffer
	cmd.Stdout = &out
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	done := make(chan error, 1)
	go func() { done <- cmd.Wait() }()
	for {
		if tok := fw.Publish("gaitrig/b1/command", 0, false, "hello"); !tok.WaitTimeout(wait) || tok.Error() != nil {
			t.Fatalf("publish: %v", tok.Error())
		}
		select {
		case err := <-done:
			if err != nil || !strings.Contains(out.String(), "hello") {
				t.Fatalf("mosquitto_sub as monitor.sub: %v, output %q", err, out.String())
			}
			return
		case <-time.After(10 * time.Millisecond):
		}
	}
}

// tool returns the path of an outside program, skipping the test without
// it unless GAITRIG_REQUIRE_TOOLS=1.
func tool(t *testing.T, name string) string {
	t.Helper()
	p, err := exec.LookPath(name)
	if err != nil {
		if os.Getenv("GAITRIG_REQUIRE_TOOLS") == "1" {
			t.Fatalf("%s is required (GAITRIG_REQUIRE_TOOLS=1): %v", name, err)
		}
		t.Skipf("%s not installed", name)
	}
	return p
}

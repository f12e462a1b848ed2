package topics

import (
	"encoding/json"
	"testing"
)

func TestClientIDRoundTrip(t *testing.T) {
	for _, role := range []Role{RoleRig, RoleFirmware} {
		id := ClientID(role, "bench1")
		gotRole, gotRig, ok := ParseClientID(id)
		if !ok || gotRole != role || gotRig != "bench1" {
			t.Errorf("ParseClientID(%q) = %q, %q, %v; want %q, bench1, true", id, gotRole, gotRig, ok, role)
		}
	}
	cases := []struct {
		id   string
		role Role
		ok   bool
	}{
		{"monitor", RoleMonitor, true},
		{"monitor.laptop", RoleMonitor, true},
		{"rig.", "", false},          // no rig id
		{"firmware.a/b", "", false},  // not one topic level
		{"firmware.#", "", false},    // wildcard
		{"board1", "", false},        // not one of ours
		{"monitorx", "", false},      // prefix without the dot
		{"mosq-1234abcd", "", false}, // a tool's default id
	}
	for _, c := range cases {
		role, _, ok := ParseClientID(c.id)
		if role != c.role || ok != c.ok {
			t.Errorf("ParseClientID(%q) = %q, %v; want %q, %v", c.id, role, ok, c.role, c.ok)
		}
	}
}

// TestContract pins the published contract (docs/protocol.md section 9):
// topic names, QoS, retain flags and rights. A change here is a protocol
// change and must be made in the document too.
func TestContract(t *testing.T) {
	if got := Topic("gaitrig", "b1", Command); got != "gaitrig/b1/command" {
		t.Errorf("Topic = %q", got)
	}
	qos := map[Leaf]byte{State: 0, Command: 0, Stop: 1, Alarm: 1, Status: 1, Telemetry: 0}
	for leaf, want := range qos {
		if leaf.QoS() != want {
			t.Errorf("%s QoS %d, want %d", leaf, leaf.QoS(), want)
		}
		if leaf.Retained() != (leaf == Status) {
			t.Errorf("%s retained = %v", leaf, leaf.Retained())
		}
	}
	rights := map[Role][2][]Leaf{
		RoleRig:      {{State, Alarm, Status, Stop, Telemetry}, {Command, Stop}},
		RoleFirmware: {{Command, Stop}, {State, Stop, Status}},
		RoleMonitor:  {nil, nil},
	}
	for role, want := range rights {
		if !same(role.Publishes(), want[0]) || !same(role.Subscribes(), want[1]) {
			t.Errorf("%s publishes %v subscribes %v, want %v %v", role, role.Publishes(), role.Subscribes(), want[0], want[1])
		}
	}
	b, err := json.Marshal(RigStatus{State: Offline, Rig: "b1", Client: "rig.b1", Reason: "closed"})
	if err != nil {
		t.Fatal(err)
	}
	if want := `{"state":"offline","rig":"b1","client":"rig.b1","reason":"closed"}`; string(b) != want {
		t.Errorf("status document %s, want %s", b, want)
	}
}

func same(a, b []Leaf) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

func TestValidLevel(t *testing.T) {
	for _, s := range []string{"", "a/b", "+", "#", "a\x00"} {
		if ValidLevel(s) == nil {
			t.Errorf("ValidLevel(%q) = nil, want an error", s)
		}
	}
	if err := ValidLevel("bench-1.left"); err != nil {
		t.Errorf("ValidLevel(bench-1.left) = %v", err)
	}
}

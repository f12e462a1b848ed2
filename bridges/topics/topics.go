// Package topics is the MQTT topic contract between a rig and its firmware:
// the topic tree <root>/<rig>/{state,command,stop,alarm,status}, the client
// id forms, the QoS and retain flag of each topic, who may publish and
// subscribe where, and the rig's status document. The embedded broker
// (bridges/broker) enforces it and the MQTT link (bridges/mqtt) follows it;
// keeping it here means the two cannot drift apart.
package topics

import (
	"errors"
	"strings"
	"time"
)

// DefaultRoot is the first topic level when none is configured.
const DefaultRoot = "gaitrig"

// Role says which part a client plays on a rig's topic tree.
type Role string

// The roles a client can have.
const (
	RoleRig      Role = "rig"      // the harness side of one rig: sends states, receives commands
	RoleFirmware Role = "firmware" // the controller under test on one rig: sends commands, receives states
	RoleMonitor  Role = "monitor"  // a read-only observer of every topic
)

// Leaf is the last level of a rig's topic: <root>/<rig>/<leaf>.
type Leaf string

// The leaves of a rig's topic tree.
const (
	State   Leaf = "state"   // config, state and heartbeat frames, rig → firmware
	Command Leaf = "command" // greeting, command and heartbeat frames, firmware → rig
	Stop    Leaf = "stop"    // stop frames, either way
	Alarm   Leaf = "alarm"   // one JSON alarm record per message, rig → observers
	Status  Leaf = "status"  // the rig's retained JSON status document (RigStatus)
	// Telemetry carries the rig's decoded, decimated telemetry: one JSON
	// RigTelemetry a few times a second, rig → observers (the fleet page).
	Telemetry Leaf = "telemetry"
)

// QoS is the MQTT quality of service each leaf is published with: frames
// of the tick loop at 0 (a late frame is worthless, the watchdog covers a
// lost one), stops, alarms and status at 1 (each must arrive).
func (l Leaf) QoS() byte {
	switch l {
	case Stop, Alarm, Status:
		return 1
	}
	return 0
}

// Retained reports whether messages on the leaf are published retained:
// only the status, so an observer that connects late sees the rig's state.
func (l Leaf) Retained() bool { return l == Status }

// Topic returns <root>/<rig>/<leaf>.
func Topic(root, rig string, leaf Leaf) string { return root + "/" + rig + "/" + string(leaf) }

// Publishes lists the leaves of its own rig a role may publish to.
func (r Role) Publishes() []Leaf {
	switch r {
	case RoleRig:
		return rigPublishes
	case RoleFirmware:
		return firmwarePublishes
	}
	return nil
}

// Subscribes lists the leaves of its own rig a role may subscribe to
// (exact topics; a monitor may subscribe to any filter instead).
func (r Role) Subscribes() []Leaf {
	switch r {
	case RoleRig:
		return rigSubscribes
	case RoleFirmware:
		return firmwareSubscribes
	}
	return nil
}

var (
	rigPublishes       = []Leaf{State, Alarm, Status, Stop, Telemetry}
	rigSubscribes      = []Leaf{Command, Stop}
	firmwarePublishes  = []Leaf{Command, Stop}
	firmwareSubscribes = []Leaf{State, Stop, Status}
)

// ClientID returns the client id of a role on a rig, "<role>.<rig>"
// ("rig.bench1", "firmware.bench1"). Without accounts the embedded broker
// knows a client only by this id.
func ClientID(role Role, rig string) string { return string(role) + "." + rig }

// ParseClientID is the inverse of ClientID for the rig and firmware roles;
// "monitor" and "monitor.<anything>" give RoleMonitor with no rig. ok is
// false for every other id.
func ParseClientID(id string) (role Role, rig string, ok bool) {
	if id == string(RoleMonitor) || strings.HasPrefix(id, string(RoleMonitor)+".") {
		return RoleMonitor, "", true
	}
	for _, r := range [...]Role{RoleRig, RoleFirmware} {
		if rig, found := strings.CutPrefix(id, string(r)+"."); found && ValidLevel(rig) == nil {
			return r, rig, true
		}
	}
	return "", "", false
}

// ValidLevel checks that s can be used as one topic level (a root or a rig
// id): not empty, no level separator, no wildcard, no NUL.
func ValidLevel(s string) error {
	if s == "" {
		return errors.New("must not be empty")
	}
	if strings.ContainsAny(s, "/+#\x00") {
		return errors.New("must not contain '/', '+', '#' or NUL")
	}
	return nil
}

// The values of RigStatus.State the link itself publishes.
const (
	Online  = "online"  // the rig's client is connected
	Offline = "offline" // the rig's client closed or lost its connection (its last will)
)

// RigStatus is the rig's retained document on <root>/<rig>/status.
type RigStatus struct {
	State  string `json:"state"`            // Online or Offline
	Rig    string `json:"rig"`              // the rig id
	Client string `json:"client"`           // the rig's MQTT client id
	Reason string `json:"reason,omitempty"` // why offline: "closed", "connection lost"
	Time   string `json:"time,omitempty"`   // UTC, RFC 3339; absent in the last will, which is written at connect time
}

// TelemetryInterval is how often a rig publishes its telemetry: a few
// times a second is enough to watch, and little for a shared broker.
const TelemetryInterval = 250 * time.Millisecond

// RigTelemetry is one message on <root>/<rig>/telemetry: what a rig is doing
// now, decoded (SI units), for observers. Numbers that are not finite are
// null.
type RigTelemetry struct {
	Scenario string   `json:"scenario"`           // the scenario's name
	Firmware string   `json:"firmware,omitempty"` // the firmware's greeting: name and build; empty before it greets
	Clock    string   `json:"clock"`              // lockstep or wallclock
	State    string   `json:"state"`              // greeting, running, tripped or done
	Outcome  string   `json:"outcome,omitempty"`  // pass, fail, tripped, aborted or invalid, once known
	Reason   string   `json:"reason,omitempty"`   // why the run ended that way
	TimeS    *float64 `json:"t_s"`                // simulated time, s
	Ticks    int64    `json:"ticks"`              // ticks run
	Steps    int      `json:"steps"`              // steps completed
	Alarms   int      `json:"alarms"`             // alarm occurrences so far, all kinds
	// Hip, Feet (the end of each leg axis, left then right) and TorsoTop
	// (equal to Hip without a torso) draw the walker as a stick figure, m.
	Hip      [2]*float64    `json:"hip_m"`
	Feet     [2][2]*float64 `json:"feet_m"`      // each foot's (x, y), m, left then right; null when not finite
	TorsoTop [2]*float64    `json:"torso_top_m"` // the torso's top (x, y), m; null when not finite
	// NormalN and Utilization are each foot's normal force, N, and
	// friction utilization |F_t|/(μ_s N), left then right.
	NormalN     [2]*float64 `json:"normal_n"`
	Utilization [2]*float64 `json:"utilization"` // null for a foot off the ground
	// LatencyUS is the latest command round trip, µs (wall-clock runs).
	LatencyUS *float64 `json:"latency_us"`
}

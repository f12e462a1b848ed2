// Package protocol defines the gaitrig wire protocol: the messages exchanged
// between the rig and the firmware, their binary layout, the CRC that guards
// each frame and the COBS framing used on byte streams. The exact bytes are
// specified in docs/protocol.md; this package is the reference implementation
// of that document. Encoding and decoding never allocate.
package protocol

import "math"

// Version is the newest protocol version this build speaks, and the one
// Encode writes when a Message leaves its Version at 0. Version 2 differs
// from version 1 only in the config, which also carries the watchdog.
const Version uint8 = 2

// MinVersion is the oldest protocol version this build speaks. Decode
// accepts frames of MinVersion … Version and refuses any other with an error
// naming both; which of them a session speaks is agreed by the greeting
// (docs/protocol.md section 8), so boards in the field that speak version 1
// keep working.
const MinVersion uint8 = 1

// MaxJoints is the largest number of actuated joints a frame can carry.
const MaxJoints = 8

// MaxNameLen is the longest firmware name or build string, in bytes.
const MaxNameLen = 32

// Type is the one-byte message type at the start of every frame.
type Type uint8

// Message types. Values are part of the wire format: never renumber them.
const (
	TypeGreeting  Type = 0x01 // firmware → rig, first message after connect
	TypeConfig    Type = 0x02 // rig → firmware, answer to the greeting
	TypeState     Type = 0x10 // rig → firmware, once per tick
	TypeCommand   Type = 0x11 // firmware → rig, answer to a state
	TypeHeartbeat Type = 0x20 // either way, keeps a quiet link alive
	TypeStop      Type = 0x30 // either way, ends the run with a reason
)

// Greeting is the firmware's first message: who it is and what it drives.
type Greeting struct {
	Version   uint8  // protocol version the firmware speaks
	Actuators uint8  // number of torques the firmware will send
	Name      string // firmware name, at most MaxNameLen bytes
	Build     string // firmware build identifier, at most MaxNameLen bytes
}

// Config is the rig's answer to a greeting: how the run will go.
type Config struct {
	TickHz      uint16             // control rate in ticks per second
	Lockstep    bool               // true: rig waits for each command before advancing
	Joints      uint8              // number of joints in State and Command
	JointNames  [MaxJoints]string  // joint order, each at most MaxNameLen bytes
	TorqueLimit [MaxJoints]float32 // N·m, symmetric limit per joint
	// WatchdogUS is the watchdog the rig enforces, in microseconds: the
	// longest time it waits for a valid command before it e-stops
	// (docs/protocol.md section 7 says what it counts). Version 2 and later
	// carry it and it is never 0 there; a version-1 config has no such field
	// and decodes with 0.
	WatchdogUS uint32
}

// Contact flag bits in State.Contacts.
const (
	ContactLeft  uint8 = 1 << 0 // left foot switch closed
	ContactRight uint8 = 1 << 1 // right foot switch closed
	// ContactBelt says the walker is on a treadmill belt and State.BeltMM
	// holds its place on it. It is not a foot switch: a firmware that
	// picks its stance from the switches masks it off (bits 0 and 1).
	ContactBelt uint8 = 1 << 2
)

// State is what the board's sensors would read at one tick.
type State struct {
	TimeUS   uint64             // simulated time, microseconds since run start
	Joints   uint8              // number of valid entries in Angle and Rate
	Angle    [MaxJoints]float32 // joint angles, rad, in Config.JointNames order
	Rate     [MaxJoints]float32 // joint rates, rad/s
	IMUPitch float32            // rad, absolute pitch of the IMU's link
	IMURate  float32            // rad/s
	Contacts uint8              // ContactLeft | ContactRight bits, and ContactBelt
	// BeltMM is the hip's place on a treadmill belt: its distance from the
	// middle of the belt along the belt, in millimetres, positive forward,
	// saturated at ±32 767. It is valid only when Contacts has ContactBelt
	// (docs/protocol.md section 3.3); otherwise it is sent as 0. It fills
	// what versions 1 and 2 reserved, so a board that does not know it
	// ignores it, and the state keeps its 84 bytes.
	BeltMM int16
}

// BeltPosition returns the hip's place on the belt in metres from the
// middle of the belt (positive forward), and whether the state carries one
// (Contacts has ContactBelt).
func (s *State) BeltPosition() (m float64, ok bool) {
	if s.Contacts&ContactBelt == 0 {
		return 0, false
	}
	return float64(s.BeltMM) / 1000, true
}

// BeltMMOf converts a place on the belt in metres from its middle to the
// wire's BeltMM: rounded to the millimetre and saturated at ±32 767 mm. NaN
// gives 0.
func BeltMMOf(m float64) int16 {
	mm := math.Round(m * 1000)
	switch {
	case mm != mm: // NaN
		return 0
	case mm > math.MaxInt16:
		return math.MaxInt16
	case mm < -math.MaxInt16:
		return -math.MaxInt16
	}
	return int16(mm)
}

// Firmware status bits in Command.Status.
const (
	StatusOK       uint16 = 0      // nothing to report
	StatusFault    uint16 = 1 << 0 // firmware detected an internal fault
	StatusSafeMode uint16 = 1 << 1 // firmware is in its own safe mode
)

// Knee unlock bits in Command.KneeUnlock: one per leg, as in
// State.Contacts.
const (
	UnlockKneeLeft  uint8 = 1 << 0 // release the left knee's latch now
	UnlockKneeRight uint8 = 1 << 1 // release the right knee's latch now
)

// Command is the firmware's answer to a State: the torques to apply.
type Command struct {
	Joints uint8              // number of valid entries in Torque
	Torque [MaxJoints]float32 // N·m, in Config.JointNames order
	Status uint16             // firmware status bits
	// KneeUnlock asks the rig to release the latch of a knee before the
	// tick this command answers is stepped: UnlockKneeLeft, UnlockKneeRight
	// (docs/protocol.md section 3.4.1). It acts once per command, only on
	// a knee with a latch and an actuator; a latch that is not engaged is
	// left as it is. It fills the byte versions 1 and 2 reserved, so a
	// board that does not know it sends 0 and nothing changes.
	KneeUnlock uint8
}

// Stop reason codes. Values are part of the wire format.
const (
	StopEnd        uint8 = 0 // run finished normally
	StopEStop      uint8 = 1 // rig e-stopped (alarm at trip severity)
	StopWatchdog   uint8 = 2 // no valid command within the watchdog time
	StopAborted    uint8 = 3 // operator interrupt (SIGINT/SIGTERM)
	StopFirmware   uint8 = 4 // firmware asked to stop
	StopBadVersion uint8 = 5 // protocol version mismatch
	StopMismatch   uint8 = 6 // greeting does not fit the rig (e.g. actuator count)
)

// Stop ends a run; either side may send it.
type Stop struct {
	Reason uint8  // one of the Stop* codes
	Text   string // human-readable detail, at most MaxNameLen bytes
}

// Message is one decoded frame. It is a plain value (no pointers to the
// frame buffer) so it can be passed through channels without allocation.
// Only the field that matches Type is meaningful.
type Message struct {
	// Version is the protocol version of the frame (its header's first
	// byte). Decode sets it; Encode writes it, and 0 means Version. A
	// session sends every frame in the version its greeting agreed.
	Version  uint8
	Type     Type     // which of the parts below the frame carries (none for a heartbeat)
	Seq      uint32   // sender's sequence number; a Command echoes its State's Seq
	Greeting Greeting // for TypeGreeting
	Config   Config   // for TypeConfig
	State    State    // for TypeState
	Command  Command  // for TypeCommand
	Stop     Stop     // for TypeStop
}

// WireVersion is the protocol version m is sent in: m.Version, or for a
// greeting that leaves it at 0 the greeting's own Version, or else Version.
// Links that carry messages without encoding them (package inproc) hand the
// receiver what the sender wrote, so the receiver asks WireVersion instead
// of reading the field.
func (m *Message) WireVersion() uint8 {
	switch {
	case m.Version != 0:
		return m.Version
	case m.Type == TypeGreeting && m.Greeting.Version != 0:
		return m.Greeting.Version
	}
	return Version
}

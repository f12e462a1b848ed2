// Package conformance is a fixed battery of checks that tells a firmware
// author whether a board speaks the gaitrig protocol (docs/protocol.md)
// correctly, before it is asked to walk. It talks to the firmware through a
// bridges.Conn directly, message by message, with the plant frozen (fixed
// sensor readings), so no result depends on a walker staying up.
//
// Every expectation the battery holds a firmware to is a named constant or
// an entry of Checks in this file, with the section of docs/protocol.md it
// comes from, so that a change of the document changes one line here.
package conformance

import (
	"gaitrig/bridges/protocol"
	"gaitrig/hil"
	"time"
)

// Expectations taken from docs/protocol.md as it stands. Each names the
// section it comes from.
const (
	// GreetingSeq is the header seq of a greeting (section 6, diagram:
	// "greeting (seq 0)").
	GreetingSeq uint32 = 0
	// GreetingTimeout is how long the battery waits for a greeting: the
	// rig's own handshake timeout, so a firmware that a run would accept
	// passes here too.
	GreetingTimeout = hil.DefaultHandshakeTimeout
	// Watchdog is the time a firmware has to answer one state in the
	// battery, and the watchdog_us a version-2 firmware is sent. The
	// battery checks that a firmware answers, not how fast (the round-trip
	// figures report that), so it allows one second: a board on a slow
	// line or a firmware process on a loaded bench host still answers
	// inside it, and a firmware that never answers is still caught.
	Watchdog = time.Second
	// ResentAnswers is how many commands a resent state gets (section
	// 6.1 item 2: "answers a repeated seq again", once per resend).
	ResentAnswers = 1
	// HeartbeatAnswerRequired: does the document ask a firmware to answer
	// a heartbeat with one of its own? Section 6 item 4 asks none; a
	// heartbeat must only not disturb the session.
	HeartbeatAnswerRequired = false
	// DefinedStatusBits are the command status bits section 3.4 defines
	// (fault, safe mode); every other bit is sent as 0 (section 6.1 item 3).
	DefinedStatusBits = protocol.StatusFault | protocol.StatusSafeMode
	// DefinedKneeUnlockBits are the command knee_unlock bits section 3.4.1
	// defines (left and right knee); the status_bits check holds the
	// command's knee_unlock byte to them as it holds status to its bits.
	DefinedKneeUnlockBits = protocol.UnlockKneeLeft | protocol.UnlockKneeRight
	// RefusalReason is the stop reason a firmware answers a config it
	// cannot drive with (section 6.1 item 5: reason 4 firmware).
	RefusalReason = protocol.StopFirmware
	// GreetAgainRequired: must a firmware greet again when the rig opens
	// the link anew after a stop? Section 6 item 5 says it must: a board
	// goes back to greeting after every stop; a one-shot build fails here.
	GreetAgainRequired = true
)

// Check names, as printed, in --json and in the JUnit file.
const (
	CheckGreeting       = "greeting"
	CheckConfig         = "config_answered"
	CheckDuplicate      = "duplicate_config"
	CheckEveryState     = "every_state_answered"
	CheckResent         = "resent_state"
	CheckBadCRC         = "bad_crc_ignored"
	CheckUnknownType    = "unknown_type_ignored"
	CheckHeartbeat      = "heartbeat"
	CheckBeltPlace      = "belt_place_taken"
	CheckStatusBits     = "status_bits"
	CheckRoundTrip      = "round_trip"
	CheckStopsOnStop    = "stops_on_stop"
	CheckGreetsAgain    = "greets_after_restart"
	CheckRefusesBadConf = "refuses_bad_config"
)

// Spec describes one check of the battery.
type Spec struct {
	// Name is one of the Check* constants.
	Name string
	// What says in a sentence what the firmware must do.
	What string
	// Section is where docs/protocol.md asks for it.
	Section string
	// Required checks decide the verdict; the others are reported only.
	Required bool
}

// Checks is the battery, in the order it runs.
var Checks = []Spec{
	{CheckGreeting, "greets within the handshake time with protocol version 1, 1–8 actuators and seq 0", "3.1, 6", true},
	{CheckConfig, "answers the first state after the config with a command echoing its seq and the config's joint count", "6 items 2–3", true},
	{CheckDuplicate, "keeps answering after receiving the same config twice", "6 item 1 (greetings repeat, so configs can repeat)", true},
	{CheckEveryState, "answers every state with one command of the right seq within the watchdog", "6 item 3, 7", true},
	{CheckResent, "answers a resent state (same seq) once more, with the same command", "6.1 item 2", true},
	{CheckBadCRC, "ignores a frame with a bad CRC and answers the next state", "5", true},
	{CheckUnknownType, "ignores a frame of an unknown type and answers the next state", "5", true},
	{CheckHeartbeat, "takes a heartbeat without disturbing the session (and answers it, if the document asks)", "3.5, 6 item 4", true},
	{CheckBeltPlace, "answers a state that carries a treadmill belt place (contacts bit 2, belt_mm) like any state, without a fault", "3.3.1, 6.1 item 3", true},
	{CheckStatusBits, "sends only the status bits the document defines (fault, safe mode), and only the knee_unlock bits it defines (left, right knee)", "3.4, 3.4.1, 6.1 item 3", true},
	{CheckRoundTrip, "round-trip time, state sent to its command back, plant frozen (a figure, not a pass mark)", "7", false},
	{CheckStopsOnStop, "sends no command after a stop from the rig", "6 item 5", true},
	{CheckGreetsAgain, "greets again when the rig opens the link anew after a stop", "6 item 5", GreetAgainRequired},
	{CheckRefusesBadConf, "answers a config it cannot drive (one joint too many) with a stop of reason firmware", "6.1 item 5", true},
}

// spec returns the table entry of a check.
func spec(name string) Spec {
	for _, s := range Checks {
		if s.Name == name {
			return s
		}
	}
	panic("conformance: no check " + name)
}

// jointNames are the names the battery configures for a firmware that
// announces n actuators: the walker's own names for 1 and 2 (docs/protocol.md
// section 6.1 item 7), plain numbered names beyond.
func jointNames(n int) []string {
	switch n {
	case 1:
		return []string{"hip"}
	case 2:
		return []string{"hip_left", "hip_right"}
	case 3:
		// A kneed compass walker: the hip, then the actuated knees, as
		// plant.Model.JointNames orders them.
		return []string{"hip", "knee_left", "knee_right"}
	case 4:
		// A kneed torso walker.
		return []string{"hip_left", "hip_right", "knee_left", "knee_right"}
	}
	out := make([]string, n)
	for i := range out {
		out[i] = "joint_" + string(rune('0'+i))
	}
	return out
}

// Frozen sensor readings of every state the battery sends: a standing
// walker, both feet down, nothing moving (our choice; any finite reading
// would do, the answer is not judged).
const (
	frozenAngle    = 0.1 // rad, left joint; the right one is the negative
	frozenContacts = protocol.ContactLeft | protocol.ContactRight
	configTickHz   = 1000 // the rig's default tick rate
	configLimit    = 40   // N·m, the document's example torque limit
)

// BeltPlaceMM is the belt place of the state CheckBeltPlace sends: 1.234 m
// behind the middle of the belt (our choice: a value with every byte
// non-zero, so a board that insists on the old reserved zeros shows it).
const BeltPlaceMM = -1234

package conformance

import (
	"errors"
	"io"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/bridges/serial"
)

// fault is the one thing a test board does wrong.
type fault int

const (
	faultNone                      fault = iota
	faultGreetingSeq                     // greets with seq 7
	faultSkipFirstState                  // never answers state seq 1
	faultDuplicateConfigDropsState       // a second config makes it drop the next state
	faultWrongSeq                        // answers state seq 20 with seq 19
	faultResentTwice                     // answers a resent state twice
	faultResentIgnored                   // does not answer a resent state
	faultAcceptsBadCRC                   // does not check the CRC
	faultUnknownTypeDropsState           // an unknown type makes it drop the next state
	faultHeartbeatDropsState             // a heartbeat makes it drop the next state
	faultUndefinedStatusBit              // sets status bit 5
	faultAnswersAfterStop                // keeps answering states after a stop
	faultNoGreetingAfterStop             // after a stop it never greets again
	faultWrongRefusalReason              // refuses a bad config with reason estop
	faultTakesBadConfig                  // takes a config with the wrong joint count
	faultStopsOnDuplicateConfig          // ends the session with a stop on a second config
	faultBeltPlaceRefused                // drops a state whose reserved bytes are not zero (a board stricter than the document)
	faultUndefinedUnlockBit              // sets knee_unlock bit 4
)

var faultNames = [...]string{"none", "greeting_seq", "skip_first_state", "duplicate_config_drops_state",
	"wrong_seq", "resent_twice", "resent_ignored", "accepts_bad_crc", "unknown_type_drops_state",
	"heartbeat_drops_state", "undefined_status_bit", "answers_after_stop", "no_greeting_after_stop",
	"wrong_refusal_reason", "takes_bad_config", "stops_on_duplicate_config", "belt_place_refused", "undefined_unlock_bit"}

func (f fault) String() string { return faultNames[f] }

// boardActuators is what the test board drives.
const boardActuators = 2

// boardGreetEvery is the test board's greeting period: shorter than the
// document's 500 ms so the tests do not wait for it.
const boardGreetEvery = 50 * time.Millisecond

// startBoard runs a board with fault f on the leader side of a new pty pair
// for the rest of the test, speaking raw bytes (it decodes frames itself, so
// a fault can skip a check the decoder would make), and returns a Dialer
// that opens the follower path as the rig opens a board's port. The pair
// keeps its own handle of the follower, so the board stays up when the
// battery closes the port and opens it again.
func startBoard(t *testing.T, f fault) Dialer {
	t.Helper()
	p, err := serial.NewPty()
	if err != nil {
		t.Fatal(err)
	}
	done := make(chan struct{})
	go func() {
		defer close(done)
		runBoard(p.Master, f)
	}()
	t.Cleanup(func() {
		p.Close()
		select {
		case <-done:
		case <-time.After(5 * time.Second):
			t.Error("the test board did not end within 5 s of its pty closing")
		}
	})
	return func() (bridges.Conn, func(), error) {
		c, err := serial.Open(serial.Config{Port: p.Path})
		if err != nil {
			return nil, nil, err
		}
		return c, func() { c.Close() }, nil
	}
}

// runBoard is the board's main loop: frames in from a reader goroutine,
// greetings on a timer, answers written from this goroutine only.
func runBoard(rw io.ReadWriter, f fault) {
	frames := make(chan []byte, 64)
	go func() {
		defer close(frames)
		rd := protocol.NewReader(rw)
		for {
			fr, err := rd.Next()
			if err != nil {
				var pe *protocol.Error
				if errors.As(err, &pe) {
					continue
				}
				return
			}
			frames <- append([]byte(nil), fr...)
		}
	}()
	var (
		scratch    [protocol.MaxFrameLen]byte
		out        []byte
		configured bool
		stopped    bool // a stop came and the board has not been configured since
		greet      = true
		dropNext   bool
		last       protocol.Message // the last command sent
		haveLast   bool
	)
	send := func(m *protocol.Message) {
		out, _ = protocol.AppendWire(out[:0], scratch[:], m)
		_, _ = rw.Write(out)
	}
	_, _ = rw.Write([]byte{0})
	tick := time.NewTicker(boardGreetEvery)
	defer tick.Stop()
	greeting := protocol.Message{Type: protocol.TypeGreeting, Greeting: protocol.Greeting{Version: protocol.Version, Actuators: boardActuators, Name: "test-board", Build: f.String()}}
	if f == faultGreetingSeq {
		greeting.Seq = 7
	}
	send(&greeting)
	for {
		var fr []byte
		var ok bool
		select {
		case <-tick.C:
			if greet && !configured {
				send(&greeting)
			}
			continue
		case fr, ok = <-frames:
			if !ok {
				return
			}
		}
		if f == faultAcceptsBadCRC && len(fr) >= protocol.MinFrameLen {
			crc := protocol.CRC16(fr[:len(fr)-2])
			fr[len(fr)-2], fr[len(fr)-1] = byte(crc), byte(crc>>8)
		}
		var m protocol.Message
		if err := protocol.Decode(fr, &m); err != nil {
			if errors.Is(err, protocol.ErrUnknownType) && f == faultUnknownTypeDropsState {
				dropNext = true
			}
			continue
		}
		switch m.Type {
		case protocol.TypeConfig:
			if int(m.Config.Joints) != boardActuators && f != faultTakesBadConfig {
				reason := protocol.StopFirmware
				if f == faultWrongRefusalReason {
					reason = protocol.StopEStop
				}
				send(&protocol.Message{Type: protocol.TypeStop, Stop: protocol.Stop{Reason: reason, Text: "joint count mismatch"}})
				configured = false
				continue
			}
			if configured && f == faultDuplicateConfigDropsState {
				dropNext = true
			}
			if configured && f == faultStopsOnDuplicateConfig {
				send(&protocol.Message{Type: protocol.TypeStop, Stop: protocol.Stop{Reason: protocol.StopFirmware, Text: "configured twice"}})
				configured = false
				continue
			}
			configured, stopped, haveLast = true, false, false
		case protocol.TypeHeartbeat:
			if f == faultHeartbeatDropsState {
				dropNext = true
			}
		case protocol.TypeStop:
			configured, stopped = false, true
			if f == faultNoGreetingAfterStop {
				greet = false
			}
		case protocol.TypeState:
			if !configured && !(stopped && f == faultAnswersAfterStop) {
				continue
			}
			if dropNext {
				dropNext = false
				continue
			}
			if f == faultSkipFirstState && m.Seq == 1 {
				continue
			}
			if f == faultBeltPlaceRefused && (m.State.BeltMM != 0 || m.State.Contacts&^3 != 0) {
				continue
			}
			if haveLast && m.Seq == last.Seq {
				switch f {
				case faultResentIgnored:
				case faultResentTwice:
					send(&last)
					send(&last)
				default:
					send(&last)
				}
				continue
			}
			last = protocol.Message{Type: protocol.TypeCommand, Seq: m.Seq, Command: protocol.Command{Joints: m.State.Joints}}
			for i := 0; i < int(m.State.Joints) && i < protocol.MaxJoints; i++ {
				last.Command.Torque[i] = -10 * m.State.Angle[i]
			}
			if f == faultUndefinedStatusBit {
				last.Command.Status = 1 << 5
			}
			if f == faultUndefinedUnlockBit {
				last.Command.KneeUnlock = protocol.UnlockKneeLeft | 1<<4
			}
			haveLast = true
			if f == faultWrongSeq && m.Seq == 20 {
				wrong := last
				wrong.Seq = 19
				send(&wrong)
				haveLast = false
				continue
			}
			send(&last)
		}
	}
}
